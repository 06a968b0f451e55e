"""Gymnasium env of the periodic-review lost-sales model (id `invbench/LostSales-v0`)."""
from __future__ import annotations

from invbench.envs.inventory_env import InventoryEnv


class LostSalesEnv(InventoryEnv):
    """Periodic-review inventory with lost sales, a lead time, and per-unit and fixed order costs.

    ## Description
    Each period: the delivery due arrives, you observe the state and order; the order arrives
    L periods later before that period's demand (L = 0: at once). Demand is met from stock;
    what cannot be met is lost at `shortage_cost` per unit. Stock left at the end of the period
    costs `holding_cost` per unit. Orders cost `unit_order_cost` per unit plus
    `fixed_order_cost` in a period with a positive order.

    ## Action Space
    `Discrete(k)`: action i orders `i * case_pack` units, up to the order cap
    (`env.unwrapped.order_sizes_units` maps index to units).

    ## Observation Space
    `Box(float32)` of length max(L, 1):

    | index | meaning                                   | min | max |
    |-------|-------------------------------------------|-----|-----|
    | 0     | on-hand stock after this period's receipt | 0   | inf |
    | i     | units arriving i periods from now (1..L-1)| 0   | inf |

    ## Rewards
    Minus the period cost: holding + lost-sales penalty + ordering. `info` carries `demand`,
    `sales`, `lost`, `order_units`, `holding_cost`, `shortage_cost`, `ordering_cost`, `cost`.

    ## Starting State
    No stock and nothing in transit, unless `start_state` is given.

    ## Episode End
    Never terminates; truncates after `episode_length` periods (default 500).

    ## Arguments
    `spec` (InstanceSpec, dict or TOML path) and/or instance keys as keywords (`lead_time=2`,
    `shortage_cost=9.0`, `demand={"distribution": "poisson", "mean": 5}`, ...), `episode_length`,
    `start_state`.

    ## Vectorized environment
    `gymnasium.make_vec("invbench/LostSales-v0", num_envs=N, vectorization_mode="vector_entry_point")`
    returns the batch simulator, which steps all N copies in one call of the same step function.

    ## Example
    >>> import gymnasium as gym, invbench
    >>> env = gym.make("invbench/LostSales-v0", lead_time=2, shortage_cost=9.0)
    >>> obs, info = env.reset(seed=0)
    >>> obs.shape
    (2,)
    """

    model = "lost_sales"
