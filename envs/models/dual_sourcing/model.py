"""Dual sourcing: one item, backorders, a regular supplier and a faster, dearer expedited one.

State layout (length 1 + (lr - 1) + max(le - 1, 0), with lr = lead_time and le =
expedited_lead_time < lr), observed after this period's deliveries: the net inventory
(on-hand - backorders), the regular orders arriving in 1 .. lr-1 periods, then the expedited
orders arriving in 1 .. le-1 periods (both oldest first). Actions are [regular, expedited].
"""
from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from invbench.envs.errors import SpecError

from ..base import Field, InventoryModel, OrderSlot, Outcome
from ..exact_space import ExactSpace
from .rules import RULES

if TYPE_CHECKING:
    from invbench.envs.spec import InstanceSpec


class DualSourcingModel(InventoryModel):
    name = "dual_sourcing"
    env_id = "invbench/DualSourcing-v0"
    env_entry = "invbench.envs.models.dual_sourcing.env:DualSourcingEnv"
    title = "single item, backorders, a regular and an expedited supplier"
    timing = (
        "At the start of a period the orders due from both suppliers arrive; the state is observed "
        "(net inventory = on-hand - backorders, and the orders in transit from each supplier) and "
        "two orders are placed: one with the regular supplier, arriving `lead_time` = lr periods "
        "later at `unit_order_cost` per unit, and one with the expedited supplier, arriving "
        "`expedited_lead_time` = le < lr periods later at `expedited_unit_cost` per unit; an order "
        "with lead time 0 arrives at once. Demand then occurs; what stock cannot meet is "
        "backordered. End-of-period cost: both ordering costs + `holding_cost` x max(net, 0) + "
        "`shortage_cost` x max(-net, 0). Each order is capped by `max_order` (default: twice the "
        "largest one-period demand kept). There is no fixed order cost and no case pack.")
    fields = {
        "expedited_lead_time": Field(int, 0, "periods between an expedited order and its arrival", 0, 49),
        "expedited_unit_cost": Field(float, 1.0, "per unit ordered from the expedited supplier", 0.0, 1e12),
    }
    # Refused rather than guessed: a fixed cost or pack size per supplier would need a key of its
    # own for each, and the published dual-sourcing grids have neither.
    unused_common = ("fixed_order_cost", "case_pack")
    cost_parts = ("holding", "shortage", "regular_ordering", "expedited_ordering")
    shortfall = "backordered"
    rules = RULES
    signed_level = True
    departing = ()  # the position falls by the whole demand, met now or later
    example = {"lead_time": 2, "expedited_lead_time": 0, "holding_cost": 1.0, "shortage_cost": 19.0,
               "unit_order_cost": 0.0, "expedited_unit_cost": 2.0, "max_order": 4,
               "demand": {"distribution": "uniform", "low": 0, "high": 2}}

    def check(self, spec: "InstanceSpec") -> None:
        if spec.lead_time <= spec.expedited_lead_time:
            raise SpecError(f"instance.lead_time: must be > expedited_lead_time ({spec.expedited_lead_time}) "
                            f"for the dual_sourcing model (the regular supplier is the slower one), "
                            f"got {spec.lead_time}")
        if spec.shortage_cost <= 0:
            raise SpecError("instance.shortage_cost: must be > 0 for the dual_sourcing model "
                            "(else ordering nothing is optimal)")

    def units_out(self, outcome: Outcome, demand: np.ndarray) -> np.ndarray:
        return np.asarray(demand, dtype=np.int64)

    def lead_time_text(self, spec: "InstanceSpec") -> str:
        return f"{spec.lead_time}/{spec.expedited_lead_time}"  # regular / expedited

    def state_labels(self, spec: "InstanceSpec") -> list[str]:
        lr, le = spec.lead_time, spec.expedited_lead_time
        s = (lambda i: "s" if i > 1 else "")
        return (["net inventory (on-hand - backorders) after the receipt"]
                + [f"regular units arriving in {i} period{s(i)}" for i in range(1, lr)]
                + [f"expedited units arriving in {i} period{s(i)}" for i in range(1, le)])

    def order_slots(self, spec: "InstanceSpec") -> list[OrderSlot]:
        sizes = np.arange(0, spec.order_cap_units + 1, dtype=np.int64)
        return [OrderSlot("regular", sizes), OrderSlot("expedited", sizes.copy())]

    def step(self, spec: "InstanceSpec", state: np.ndarray, action: np.ndarray,
             demand: np.ndarray) -> tuple[np.ndarray, Outcome]:
        return RULES.apply(spec, state, action, demand)  # the rules: rules.py (also compiled)

    def exact_space(self, spec: "InstanceSpec") -> ExactSpace:
        from .space import DualSourcingSpace
        return DualSourcingSpace(self, spec)
