"""Gymnasium env of the N-stage serial supply chain (id `invbench/Serial-v0`)."""
from __future__ import annotations

from invbench.envs.inventory_env import InventoryEnv


class SerialEnv(InventoryEnv):
    """A serial supply chain of N = 2 .. 6 stages; stage 1 meets customer demand with backorders.

    ## Description
    At the start of a period the shipments due arrive at every stage, and you observe the state.
    Every stage j places an order on the stage above it (stage N on an outside supplier with
    unlimited stock). Working down from stage N, a stage ships min(order, its on-hand) at once
    (the supplier ships every order in full); the shipment arrives at stage j `lead_times[j]`
    periods later (0: at once, in time to be shipped on or sold). An unfilled part is simply not
    shipped: the stage below may order again. Then customer demand occurs at stage 1 and waits
    as backorders when stock runs out. End-of-period costs: `holding_costs[j]` per unit on hand
    at stage j; stock in transit to stage j at the rate of the stage that shipped it
    (`holding_costs[j+1]`; stock from the outside supplier costs nothing in transit);
    `shortage_cost` per unit backordered at stage 1. Holding costs must not increase upstream.

    ## Action Space
    `MultiDiscrete([c_1 + 1, ..., c_N + 1])`: entry j orders that many units for stage j (stage 1
    first), up to its cap `max_orders[j]` (or `max_order` for every stage; default: the largest
    one-period demand times one plus the lead times above stage j).

    ## Observation Space
    `Box(float32)`; for each stage j in turn (stage 1 first) a block of max(L_j, 1) entries:

    | entry of block j | meaning                                                      | min  | max |
    |------------------|--------------------------------------------------------------|------|-----|
    | 0                | stage 1: net inventory (on-hand - backorders); j > 1: on-hand | -inf (stage 1), 0 | inf |
    | i = 1 .. L_j - 1 | units arriving at stage j in i periods                        | 0    | inf |

    ## Rewards
    Minus the period cost: holding + in-transit holding + backorder penalty. `info` carries
    `demand`, `sales` (demand filled at once), `backordered`, `supplied` (units the supplier
    shipped to stage N), `order_units` (one per stage) and the cost parts.

    ## Starting State
    No stock, no backorders and nothing in transit, unless `start_state` is given.

    ## Episode End
    Never terminates; truncates after `episode_length` periods (default 500).

    ## Arguments
    `spec` and/or instance keys as keywords (`lead_times=[1, 2]`, `holding_costs=[2.0, 1.0]`,
    `shortage_cost=19.0`, `max_orders=[20, 10]`), `episode_length`, `start_state`.

    ## Vectorized environment
    `gymnasium.make_vec("invbench/Serial-v0", num_envs=N, vectorization_mode="vector_entry_point")`
    returns the batch simulator, stepping all N copies in one call of the same step function.

    ## Example
    >>> import gymnasium as gym, invbench
    >>> env = gym.make("invbench/Serial-v0", lead_times=[1, 2], holding_costs=[2.0, 1.0])
    >>> obs, info = env.reset(seed=0)
    >>> obs.shape
    (3,)
    """

    model = "serial"
