"""The periodic-review lost-sales model: unmet demand is lost at a cost per unit."""
from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from invbench.envs.errors import SpecError
from invbench.envs.newsvendor import order_up_to_level

from ..base import InventoryModel, Outcome
from ..demand_split import DemandSplit, fixed_lead_time, pipeline_split
from ..exact_space import (PEAK_BYTES_PER_NNZ, Bounds, ExactSpace, SizeEstimate, count_simplex_states,
                           eoq_room)
from ..pipeline import advance, ordering_cost, pipeline_labels, stock_inputs

if TYPE_CHECKING:
    from invbench.baselines.mdp import FiniteMDP
    from invbench.envs.spec import InstanceSpec


class LostSalesModel(InventoryModel):
    name = "lost_sales"
    env_id = "invbench/LostSales-v0"
    env_entry = "invbench.envs.models.lost_sales.env:LostSalesEnv"
    title = "single item, lost sales, fixed lead time"
    timing = (
        "At the start of a period the order placed L periods ago arrives; the state is observed "
        "(on-hand stock and the orders in transit) and an order is placed, which arrives L periods "
        "later before that period's demand (L = 0: at once). Demand is met from stock; what cannot "
        "be met is lost at `shortage_cost` per unit. End-of-period stock costs `holding_cost` per "
        "unit; an order costs `unit_order_cost` per unit plus `fixed_order_cost` when positive.")
    stock_then_pipeline = True
    shortfall = "lost"
    example = {"lead_time": 2, "holding_cost": 1.0, "shortage_cost": 9.0,
               "demand": {"distribution": "poisson", "mean": 2.0}}

    def check(self, spec: "InstanceSpec") -> None:
        if spec.shortage_cost <= 0 and spec.holding_cost <= 0:
            raise SpecError("instance.shortage_cost: must be > 0 when holding_cost is 0")

    def state_labels(self, spec: "InstanceSpec") -> list[str]:
        return pipeline_labels("on-hand stock after this period's receipt", max(spec.lead_time, 1))

    def step(self, spec: "InstanceSpec", state: np.ndarray, action: np.ndarray,
             demand: np.ndarray) -> tuple[np.ndarray, Outcome]:
        L = spec.lead_time
        state, order, demand, available = stock_inputs(state, action, demand, L)
        sales = np.minimum(available, demand)
        end = available - sales
        lost = demand - sales
        nxt, received = advance(state, order, end, L)
        costs = {"holding": spec.holding_cost * end, "shortage": spec.shortage_cost * lost,
                 "ordering": ordering_cost(order, spec.unit_order_cost, spec.fixed_order_cost)}
        return nxt, Outcome(costs, {"sales": sales, "lost": lost, "end_level": end, "received": received})

    def exact_space(self, spec: "InstanceSpec") -> ExactSpace:
        return LostSalesSpace(self, spec)


class LostSalesSpace(ExactSpace):
    """States with on-hand + pipeline <= B; orders keep the position after ordering <= B."""

    representation = "lost_sales"

    def initial_bounds(self) -> Bounds:
        """The optimal position after ordering does not exceed the order-up-to level of the
        backorder system with the same costs (Morton 1969; Zipkin 2008, from memory): lost sales
        never needs more protection than backorders. A fixed order cost adds EOQ-scale room, a
        case pack one pack. `exact.solve` verifies the bound after solving and widens it."""
        q = self.spec.case_pack
        return Bounds(upper=max(order_up_to_level(self.spec) + eoq_room(self.spec) + q, q))

    def estimate(self, b: Bounds) -> SizeEstimate:
        # pairs with stock v: (pipeline, order) combinations with sum <= B - v, thinned by the
        # case pack; each has min(v, max demand) + 1 distinct next states.
        n, B, q = self.dim, b.upper, self.spec.case_pack
        states = count_simplex_states(n, B)
        dmax = self.spec.demand.pmf().support_max
        per_v = [count_simplex_states(n, B - v) for v in range(B + 1)]
        pairs = sum(per_v) // q + states
        transitions = sum(c * (min(v, dmax) + 1) for v, c in enumerate(per_v)) // q + states
        # measured peak of the fast build: about 51-54 bytes per stored transition (L = 4, 5)
        return SizeEstimate(states, pairs, transitions, transitions * PEAK_BYTES_PER_NNZ)

    def fast_build(self, b: Bounds) -> "FiniteMDP":
        from .fast_build import build_fast
        return build_fast(self, b)

    def demand_split(self) -> DemandSplit | None:
        """Demand meets the on-hand stock only; the pipeline moves as `pipeline.advance` says."""
        L = fixed_lead_time(self.spec)
        return None if L is None else pipeline_split(L, self.dim)
