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

    Random lead time (`lead_time={"pmf": [p0, p1, ...]}`, longest M): p_k is the probability that
    an order takes k periods. After you order, the period's cut-off A is drawn (independently
    each period) and every order still out that was placed at least A periods ago arrives before
    demand, the new one too when A = 0; so orders never overtake each other, and the law of A,
    P(A > j) = P(L > j) / P(L > j - 1), gives each order exactly the pmf (Kaplan 1970; it needs a
    hazard p_k / P(L >= k) that never falls). You never know an order's lead time when placing
    it. The cut-off comes from a random stream of its own, so with the same seed the demands are
    those of a fixed lead time. With `"crossing": True` each order's lead time is drawn on its
    own (orders may cross; no exact optimum for such instances).

    ## Action Space
    `Discrete(k)`: action i orders `i * case_pack` units, up to the order cap
    (`env.unwrapped.order_sizes_units` maps index to units).

    ## Observation Space
    `Box(float32)` of length max(L, 1):

    | index | meaning                                   | min | max |
    |-------|-------------------------------------------|-----|-----|
    | 0     | on-hand stock after this period's receipt | 0   | inf |
    | i     | units arriving i periods from now (1..L-1)| 0   | inf |

    Random lead time: length max(M, 1); index 0 is the on-hand stock plus the order placed M
    periods ago (it arrives this period for sure), index i = 1..M-1 the order placed M - i
    periods ago if it is still out. A point mass at M gives the fixed-lead-time layout.

    ## Rewards
    Minus the period cost: holding + lost-sales penalty + ordering. `info` carries `demand`,
    `sales`, `lost`, `order_units`, `holding_cost`, `shortage_cost`, `ordering_cost`, `cost`
    (random lead time: also `arrived`, the units delivered this period before demand).

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
    >>> env = gym.make("invbench/LostSales-v0", lead_time={"pmf": [0.2, 0.5, 0.3]}, shortage_cost=9.0)
    >>> obs, info = env.reset(seed=0)
    >>> obs.shape
    (2,)
    """

    model = "lost_sales"
