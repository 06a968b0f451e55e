"""A serial supply chain of N stages: stage 1 meets customer demand (backorders), stage N buys
from an outside supplier with unlimited stock, each stage orders from the one above it.

State layout (stage 1 first), observed after this period's receipts: for each stage j a block
[stock at j, units arriving at j in 1 .. L_j - 1 periods]; stage 1's stock is its net inventory
(on-hand minus backorders). Actions: one order per stage, in units, stage 1 first.
"""
from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from invbench.envs.errors import SpecError

from ..base import Field, InventoryModel, OrderSlot, Outcome
from .rules import RULES

if TYPE_CHECKING:
    from invbench.envs.spec import InstanceSpec

MAX_STAGES = 6


def blocks(spec: "InstanceSpec") -> list[tuple[int, int]]:
    """(first column, number of columns) of each stage's block in the state, stage 1 first."""
    out, at = [], 0
    for L in spec.lead_times:
        out.append((at, max(L, 1)))
        at += max(L, 1)
    return out


def default_caps(spec: "InstanceSpec") -> tuple[int, ...]:
    """Order caps when none are given: dmax (1 + lead times above stage j), dmax being the
    largest one-period demand. Under an echelon base-stock policy with levels rising upstream a
    stage's order is the last demand plus what the stage above could not ship, and that is at
    most dmax times the lead time above it; so these caps never bind on such a policy's
    long-run path (they bind only while filling up from an empty start)."""
    dmax = max(spec.demand.pmf().support_max, 1)
    L = spec.lead_times
    return tuple(dmax * (1 + sum(L[j + 1:])) for j in range(len(L)))


class SerialModel(InventoryModel):
    name = "serial"
    env_id = "invbench/Serial-v0"
    env_entry = "invbench.envs.models.serial.env:SerialEnv"
    title = "N-stage serial supply chain, backorders at stage 1, one order per stage"
    timing = (
        "At the start of a period the shipments due arrive at every stage; the state is observed. "
        "Every stage j places an order on the stage above it (stage N on an outside supplier with "
        "unlimited stock); working down from stage N, a stage ships min(order, its on-hand) at once "
        "(the supplier ships every order in full) and the shipment arrives `lead_times[j]` periods "
        "later (0: at once, in time to be shipped on or sold); an unfilled part is simply not "
        "shipped (the stage below may order again). Then customer demand occurs at stage 1 and "
        "waits as backorders when stock runs out. End-of-period costs: `holding_costs[j]` per unit "
        "on hand at stage j, stock in transit to stage j at the rate of the stage that shipped it "
        "(`holding_costs[j+1]`; nothing for stock in transit from the outside supplier), and "
        "`shortage_cost` per unit backordered at stage 1.")
    fields = {
        "lead_times": Field(int, (1, 1), "periods from shipment to arrival at each stage, stage 1 first",
                            0, 20, length=(2, MAX_STAGES)),
        "holding_costs": Field(float, (2.0, 1.0), "per unit on hand at each stage per period, stage 1 first",
                               0.0, 1e12, length=(2, MAX_STAGES)),
        "max_orders": Field(int, None, "largest order of each stage in units, stage 1 first", 1, 100000,
                            optional=True, length=(2, MAX_STAGES)),
    }
    unused_common = ("lead_time", "holding_cost", "unit_order_cost", "fixed_order_cost", "case_pack",
                     "discount")
    cost_parts = ("holding", "in_transit", "shortage")
    shortfall = "backordered"
    rules = RULES
    signed_level = True
    departing = ()
    example = {"lead_times": [1, 1], "holding_costs": [2.0, 1.0], "shortage_cost": 9.0,
               "demand": {"distribution": "empirical", "pmf": [0.3, 0.4, 0.2, 0.1]}}

    def check(self, spec: "InstanceSpec") -> None:
        n = len(spec.lead_times)
        if len(spec.holding_costs) != n:
            raise SpecError(f"instance.holding_costs: must have one entry per stage ({n}, as lead_times), "
                            f"got {len(spec.holding_costs)}")
        if spec.max_orders is not None and spec.max_order is not None:
            raise SpecError("instance.max_orders: give either max_order (the cap of every stage) or max_orders "
                            "(one cap per stage), not both")
        if spec.max_orders is not None and len(spec.max_orders) != n:
            raise SpecError(f"instance.max_orders: must have one entry per stage ({n}, as lead_times), "
                            f"got {len(spec.max_orders)}")
        h = spec.holding_costs
        if any(h[j] < h[j + 1] for j in range(n - 1)):
            raise SpecError(f"instance.holding_costs: must not increase upstream (stage 1 first; value is "
                            f"added downstream), got {list(h)}")
        if spec.shortage_cost <= 0:
            raise SpecError("instance.shortage_cost: must be > 0 (else ordering nothing is optimal)")

    # ------------------------------------------------------------------ layout
    def stages(self, spec: "InstanceSpec") -> int:
        return len(spec.lead_times)

    def caps(self, spec: "InstanceSpec") -> tuple[int, ...]:
        """Each stage's order cap: `max_orders`, else `max_order` for every stage, else the default."""
        if spec.max_orders is not None:
            return tuple(spec.max_orders)
        if spec.max_order is not None:
            return (spec.max_order,) * len(spec.lead_times)
        return default_caps(spec)

    def lead_time_text(self, spec: "InstanceSpec") -> str:
        return "+".join(str(x) for x in spec.lead_times)  # stage 1 first

    def state_labels(self, spec: "InstanceSpec") -> list[str]:
        labels = []
        for j, L in enumerate(spec.lead_times, start=1):
            labels.append("net inventory at stage 1 (on-hand - backorders)" if j == 1 else f"on-hand at stage {j}")
            labels += [f"units arriving at stage {j} in {i} period{'s' if i > 1 else ''}" for i in range(1, L)]
        return labels

    def order_slots(self, spec: "InstanceSpec") -> list[OrderSlot]:
        return [OrderSlot(f"stage {j} order", np.arange(0, c + 1, dtype=np.int64))
                for j, c in enumerate(self.caps(spec), start=1)]

    def index_radix(self, spec: "InstanceSpec") -> int:
        """Upper stages' stock can pile up beyond one order: allow four times the widest span
        the exact space starts from, as the evaluator does for stock levels."""
        b = self.exact_space(spec).initial_bounds()
        return int(4 * (b.upper - b.lower + sum(self.caps(spec))) + 100)

    def units_in(self, outcome: Outcome, action: np.ndarray) -> np.ndarray:
        return outcome.flows["supplied"]

    def units_out(self, outcome: Outcome, demand: np.ndarray) -> np.ndarray:
        return np.asarray(demand, dtype=np.int64)

    # ------------------------------------------------------------------ dynamics
    def step(self, spec: "InstanceSpec", state: np.ndarray, action: np.ndarray,
             demand: np.ndarray) -> tuple[np.ndarray, Outcome]:
        return RULES.apply(spec, state, action, demand)  # the rules: rules.py (also compiled)

    def exact_space(self, spec: "InstanceSpec"):
        from .space import SerialSpace
        return SerialSpace(self, spec)
