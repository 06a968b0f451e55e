"""The periodic-review lost-sales model: unmet demand is lost at a cost per unit."""
from __future__ import annotations

from typing import TYPE_CHECKING, Callable

import numpy as np

from invbench.envs.errors import SpecError
from invbench.envs.newsvendor import order_up_to_level

from ..base import InventoryModel, Outcome
from ..demand_split import DemandSplit, fixed_lead_time, pipeline_split
from ..exact_space import (PEAK_BYTES_PER_NNZ, Bounds, ExactSpace, SizeEstimate, count_simplex_states,
                           eoq_room)
from ..pipeline import layout_labels, ordering_cost, receive
from .. import random_lead_time as rlt
from .rules import RULES

if TYPE_CHECKING:
    from invbench.baselines.mdp import FiniteMDP
    from invbench.envs.spec import InstanceSpec


class LostSalesModel(rlt.RandomLeadTimeHooks, InventoryModel):
    name = "lost_sales"
    env_id = "invbench/LostSales-v0"
    env_entry = "invbench.envs.models.lost_sales.env:LostSalesEnv"
    title = "single item, lost sales, fixed or random lead time"
    timing = (
        "At the start of a period the order placed L periods ago arrives; the state is observed "
        "(on-hand stock and the orders in transit) and an order is placed, which arrives L periods "
        "later before that period's demand (L = 0: at once). Demand is met from stock; what cannot "
        "be met is lost at `shortage_cost` per unit. End-of-period stock costs `holding_cost` per "
        "unit; an order costs `unit_order_cost` per unit plus `fixed_order_cost` when positive. "
        "A random lead time `lead_time = { pmf = [p0, p1, ...] }` (longest M): the state is the "
        "on-hand stock plus the order now M periods old (it arrives for sure) and the orders still "
        "out by age; after the order is placed a cut-off A is drawn and every order placed at least "
        "A periods ago arrives before demand (the new one too when A = 0), so orders never cross "
        "and each order's lead time has the given pmf (Kaplan 1970). With `crossing = true` each "
        "order's lead time is drawn on its own instead (simulation only).")
    stock_then_pipeline = True
    random_lead_time = True
    shortfall = "lost"
    rules = RULES
    example = {"lead_time": 2, "holding_cost": 1.0, "shortage_cost": 9.0,
               "demand": {"distribution": "poisson", "mean": 2.0}}
    variants = {"random_lead_time": {**example, "lead_time": {"pmf": [0.2, 0.5, 0.3]}}}

    def backorder_twin(self, spec: "InstanceSpec") -> "InstanceSpec":
        return spec.with_(model="backorder")

    def check(self, spec: "InstanceSpec") -> None:
        if spec.shortage_cost <= 0 and spec.holding_cost <= 0:
            raise SpecError("instance.shortage_cost: must be > 0 when holding_cost is 0")

    def state_labels(self, spec: "InstanceSpec") -> list[str]:
        return layout_labels(spec, "on-hand stock after this period's receipt"
                             if spec.lead_time_law is None else "on-hand stock")

    def step(self, spec: "InstanceSpec", state: np.ndarray, action: np.ndarray,
             demand: np.ndarray, **inputs: np.ndarray) -> tuple[np.ndarray, Outcome]:
        if spec.lead_time_law is None and not inputs:
            return RULES.apply(spec, state, action, demand)  # the rules: rules.py (also compiled)
        # a random lead time: the receipt by the cut-off (random_lead_time.py), then the same accounting
        r = receive(spec, state, action, demand, inputs)
        sales = np.minimum(r.available, r.demand)
        end = r.available - sales
        lost = r.demand - sales
        nxt, received = r.advance(end)
        costs = {"holding": spec.holding_cost * end, "shortage": spec.shortage_cost * lost,
                 "ordering": ordering_cost(r.order, spec.unit_order_cost, spec.fixed_order_cost)}
        return nxt, Outcome(costs, {"sales": sales, "lost": lost, "end_level": end, "received": received,
                                    **r.flows})

    def exact_space(self, spec: "InstanceSpec") -> ExactSpace:
        if spec.lead_time_law is not None:  # no structured build: the generic one, opted out here
            from .random_space import RandomLeadTimeSpace
            return RandomLeadTimeSpace(self, spec)
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
        return self.sizes(b, stock_meets_demand=lambda v: v, outcomes=1)

    def sizes(self, b: Bounds, stock_meets_demand: "Callable[[int], int]", outcomes: int) -> SizeEstimate:
        """Pairs with stock v: (pipeline, order) combinations with sum <= B - v, thinned by the
        case pack; each has min(stock that meets demand, max demand) + 1 distinct next states
        per value of the other random inputs (`outcomes`)."""
        n, B, q = self.dim, b.upper, self.spec.case_pack
        states = count_simplex_states(n, B)
        dmax = self.spec.demand.pmf().support_max
        per_v = [count_simplex_states(n, B - v) for v in range(B + 1)]
        pairs = sum(per_v) // q + states
        transitions = outcomes * (sum(c * (min(stock_meets_demand(v), dmax) + 1) for v, c in enumerate(per_v)) // q
                                  + states)
        # measured peak of the fast build: about 51-54 bytes per stored transition (L = 4, 5)
        return SizeEstimate(states, pairs, transitions, transitions * PEAK_BYTES_PER_NNZ)

    def fast_build(self, b: Bounds) -> "FiniteMDP":
        from .fast_build import build_fast
        return build_fast(self, b)

    def demand_split(self) -> DemandSplit | None:
        """Demand meets the on-hand stock only; the pipeline moves as `pipeline.advance` says."""
        L = fixed_lead_time(self.spec)
        return None if L is None else pipeline_split(L, self.dim)
