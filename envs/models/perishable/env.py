"""Gymnasium env of the perishable-goods model (id `invbench/Perishable-v0`)."""
from __future__ import annotations

from invbench.envs.inventory_env import InventoryEnv


class PerishableEnv(InventoryEnv):
    """Single item with a fixed shelf life, lost sales, FIFO or LIFO issuing.

    ## Description
    At the start of a period the order placed L periods ago arrives with `shelf_life` = m
    periods of life (counting the arrival period); you observe the state and order (with L = 0
    the order arrives at once, fresh). Demand is met from the oldest units first
    (`issuing="fifo"`) or the freshest first (`"lifo"`); unmet demand is lost at
    `shortage_cost` per unit. Unsold units with one period of life left perish at the end of
    the period at `outdating_cost` per unit; the rest age by one period and are carried over at
    `holding_cost` per unit. Orders cost `unit_order_cost` per unit plus `fixed_order_cost`.

    ## Action Space
    `Discrete(k)`: action i orders `i * case_pack` units, up to the order cap.

    ## Observation Space
    `Box(float32)` of length m - 1 + L:

    | index          | meaning                                              | min | max |
    |----------------|------------------------------------------------------|-----|-----|
    | 0 .. j-1       | on-hand with 1 .. j periods of life left (oldest first); j = m - 1 when L = 0, m when L >= 1 | 0 | inf |
    | j .. m + L - 2 | units arriving in 1 .. L-1 periods                   | 0   | inf |

    ## Rewards
    Minus the period cost: holding + lost-sales penalty + outdating + ordering. `info` carries
    `demand`, `sales`, `lost`, `outdated`, `received`, `order_units`, `holding_cost`,
    `shortage_cost`, `outdating_cost`, `ordering_cost`, `cost`.

    ## Starting State
    No stock and nothing in transit, unless `start_state` is given.

    ## Episode End
    Never terminates; truncates after `episode_length` periods (default 500).

    ## Arguments
    `spec` and/or instance keys as keywords (`shelf_life=3`, `issuing="lifo"`,
    `outdating_cost=100.0`, `lead_time=1`, ...), `episode_length`, `start_state`.

    ## Vectorized environment
    `gymnasium.make_vec("invbench/Perishable-v0", num_envs=N, vectorization_mode="vector_entry_point")`
    returns the batch simulator, stepping all N copies in one call of the same step function.

    ## Example
    >>> import gymnasium as gym, invbench
    >>> env = gym.make("invbench/Perishable-v0", shelf_life=3, lead_time=1, shortage_cost=100.0)
    >>> obs, info = env.reset(seed=0)
    >>> obs.shape
    (3,)
    """

    model = "perishable"
