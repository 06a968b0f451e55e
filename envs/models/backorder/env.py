"""Gymnasium env of the periodic-review backorder model (id `invbench/Backorder-v0`)."""
from __future__ import annotations

from invbench.envs.inventory_env import InventoryEnv


class BackorderEnv(InventoryEnv):
    """Periodic-review inventory with backorders, a lead time, and per-unit and fixed order costs.

    ## Description
    Each period: the delivery due arrives, you observe the state and order; the order arrives
    L periods later before that period's demand (L = 0: at once). Demand not met from stock is
    backordered and filled from later deliveries; each unit backordered at the end of a period
    costs `shortage_cost`. Stock left at the end of the period costs `holding_cost` per unit.
    Orders cost `unit_order_cost` per unit plus `fixed_order_cost` in a period with an order.

    Random lead time (`lead_time={"pmf": [p0, p1, ...]}`, longest M): as in the lost-sales env,
    after you order a cut-off A is drawn and every order still out that was placed at least A
    periods ago arrives before demand (orders never cross; each order's lead time has the pmf;
    Kaplan 1970). The end-of-period net inventory is then the position after ordering V periods
    earlier minus the demand of those V + 1 periods, V distributed as the lead time, so
    base-stock on the position is optimal. `"crossing": True` draws each order's lead time on its
    own (simulation only).

    ## Action Space
    `Discrete(k)`: action i orders `i * case_pack` units, up to the order cap
    (`env.unwrapped.order_sizes_units` maps index to units).

    ## Observation Space
    `Box(float32)` of length max(L, 1):

    | index | meaning                                                 | min  | max |
    |-------|---------------------------------------------------------|------|-----|
    | 0     | net inventory (on-hand - backorders) after the receipt  | -inf | inf |
    | i     | units arriving i periods from now (1..L-1)              | 0    | inf |

    Random lead time: length max(M, 1); index 0 is the net inventory plus the order placed M
    periods ago (it arrives this period for sure), index i = 1..M-1 the order placed M - i
    periods ago if it is still out.

    ## Rewards
    Minus the period cost: holding + backorder penalty + ordering. `info` carries `demand`,
    `sales` (demand filled at once), `backordered`, `order_units` and the cost parts (random
    lead time: also `arrived`, the units delivered this period before demand).

    ## Starting State
    No stock, no backorders and nothing in transit, unless `start_state` is given.

    ## Episode End
    Never terminates; truncates after `episode_length` periods (default 500).

    ## Arguments
    `spec` (InstanceSpec, dict or TOML path) and/or instance keys as keywords, `episode_length`,
    `start_state`.

    ## Vectorized environment
    `gymnasium.make_vec("invbench/Backorder-v0", num_envs=N, vectorization_mode="vector_entry_point")`
    returns the batch simulator, stepping all N copies in one call of the same step function.

    ## Example
    >>> import gymnasium as gym, invbench
    >>> env = gym.make("invbench/Backorder-v0", lead_time=1, shortage_cost=4.0)
    >>> obs, info = env.reset(seed=0)
    >>> float(obs[0])
    0.0
    """

    model = "backorder"
