"""Gymnasium env of the dual-sourcing model (id `invbench/DualSourcing-v0`)."""
from __future__ import annotations

from invbench.envs.inventory_env import InventoryEnv


class DualSourcingEnv(InventoryEnv):
    """Periodic-review inventory with backorders and two suppliers: a regular one (lead time
    lr = `lead_time`, `unit_order_cost` per unit) and an expedited one (lead time
    le = `expedited_lead_time` < lr, `expedited_unit_cost` per unit).

    ## Description
    At the start of a period the orders due from both suppliers arrive; you observe the net
    inventory (on-hand - backorders) and the orders in transit from each supplier, and place
    two orders, one per supplier; an order with lead time 0 arrives at once. Demand then occurs
    and what stock cannot meet is backordered. End-of-period cost: both ordering costs +
    `holding_cost` x max(net, 0) + `shortage_cost` x max(-net, 0). Each order is capped by
    `max_order` (default: twice the largest one-period demand kept). There is no fixed order
    cost and no case pack (giving either is refused).

    ## Action Space
    `MultiDiscrete([k, k])`: [regular, expedited], index i orders i units (0 .. `max_order`).

    ## Observation Space
    `Box(float32)` of length 1 + (lr - 1) + max(le - 1, 0):

    | index        | meaning                                                 | min  | max |
    |--------------|---------------------------------------------------------|------|-----|
    | 0            | net inventory (on-hand - backorders) after the receipt  | -inf | inf |
    | 1 .. lr-1    | regular units arriving in 1 .. lr-1 periods             | 0    | inf |
    | lr .. end    | expedited units arriving in 1 .. le-1 periods           | 0    | inf |

    ## Rewards
    Minus the period cost: holding + backorder penalty + regular and expedited ordering.
    `info` carries `demand`, `sales` (demand filled at once), `backordered`, `order_units`
    ([regular, expedited]) and the cost parts.

    ## Starting State
    No stock, no backorders and nothing in transit, unless `start_state` is given.

    ## Episode End
    Never terminates; truncates after `episode_length` periods (default 500).

    ## Arguments
    `spec` (InstanceSpec, dict or TOML path) and/or instance keys as keywords (`lead_time` must
    exceed `expedited_lead_time`), `episode_length`, `start_state`.

    ## Vectorized environment
    `gymnasium.make_vec("invbench/DualSourcing-v0", num_envs=N, vectorization_mode="vector_entry_point")`
    returns the batch simulator, stepping all N copies in one call of the same step function.

    ## Example
    >>> import gymnasium as gym, invbench
    >>> env = gym.make("invbench/DualSourcing-v0", lead_time=2, expedited_unit_cost=5.0)
    >>> obs, info = env.reset(seed=0)
    >>> obs.tolist()
    [0.0, 0.0]
    """

    model = "dual_sourcing"
