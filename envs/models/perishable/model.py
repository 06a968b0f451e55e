"""Perishable goods: a fixed shelf life, issuing FIFO or LIFO, lost sales, outdating cost.

State layout (length m - 1 + L, with m = shelf_life), observed after this period's receipt:
on-hand stock by remaining life, oldest first (life 1 .. m-1 when L = 0, life 1 .. m when
L >= 1, life m being the batch that has just arrived), then the orders arriving in 1 .. L-1
periods, oldest first. With L = 0 the order placed now arrives at once with m periods of life.
"""
from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from invbench.envs.errors import SpecError
from invbench.envs.newsvendor import order_up_to_level

from ..base import Field, InventoryModel, Outcome
from ..exact_space import Bounds, ExactSpace, eoq_room
from .rules import RULES

if TYPE_CHECKING:
    from invbench.envs.spec import InstanceSpec


class PerishableModel(InventoryModel):
    name = "perishable"
    perishes = True
    env_id = "invbench/Perishable-v0"
    env_entry = "invbench.envs.models.perishable.env:PerishableEnv"
    title = "single item with a fixed shelf life, lost sales, FIFO or LIFO issuing"
    timing = (
        "At the start of a period the order placed L periods ago arrives with `shelf_life` = m "
        "periods of life (counting the arrival period); the state is observed and an order placed "
        "(with L = 0 it arrives at once, fresh). Demand is met from the oldest units first "
        "(`issuing = \"fifo\"`) or the freshest first (`\"lifo\"`); unmet demand is lost at "
        "`shortage_cost` per unit. Unsold units with one period of life left perish at the end of "
        "the period at `outdating_cost` per unit; the rest age by one period and are carried over "
        "at `holding_cost` per unit. Orders cost `unit_order_cost` per unit plus "
        "`fixed_order_cost` when positive.")
    fields = {
        "shelf_life": Field(int, 3, "periods a unit can be sold, counting its arrival period", 1, 20),
        "issuing": Field(str, "fifo", "which units meet demand first", choices=("fifo", "lifo")),
        "outdating_cost": Field(float, 0.0, "per unit that perishes", 0.0, 1e12),
    }
    cost_parts = ("holding", "shortage", "outdating", "ordering")
    shortfall = "lost"
    rules = RULES
    departing = ("sales", "outdated")
    example = {"lead_time": 1, "shelf_life": 2, "issuing": "fifo", "holding_cost": 1.0, "shortage_cost": 9.0,
               "outdating_cost": 3.0, "demand": {"distribution": "poisson", "mean": 2.0}}

    def check(self, spec: "InstanceSpec") -> None:
        if spec.shelf_life + spec.lead_time < 2:
            raise SpecError("instance.shelf_life: must be >= 2 when lead_time = 0 (with one period of "
                            "life and immediate delivery nothing is carried over)")
        if spec.shortage_cost <= 0:
            raise SpecError("instance.shortage_cost: must be > 0 (else ordering nothing is optimal)")

    def carrying_cost(self, spec: "InstanceSpec") -> float:
        """Holding plus the outdating cost spread over the shelf life (common practice)."""
        return float(spec.holding_cost + spec.outdating_cost / spec.shelf_life)

    @staticmethod
    def _on_hand_slots(spec: "InstanceSpec") -> int:
        return spec.shelf_life - 1 if spec.lead_time == 0 else spec.shelf_life

    def state_labels(self, spec: "InstanceSpec") -> list[str]:
        k = self._on_hand_slots(spec)
        labels = [f"on-hand with {j} period{'s' if j > 1 else ''} of life left" for j in range(1, k + 1)]
        labels += [f"units arriving in {i} period{'s' if i > 1 else ''}" for i in range(1, spec.lead_time)]
        return labels

    def step(self, spec: "InstanceSpec", state: np.ndarray, action: np.ndarray,
             demand: np.ndarray) -> tuple[np.ndarray, Outcome]:
        return RULES.apply(spec, state, action, demand)  # the rules: rules.py (also compiled)

    def exact_space(self, spec: "InstanceSpec") -> ExactSpace:
        return PerishableSpace(self, spec)


class PerishableSpace(ExactSpace):
    """States with all stock and orders in transit summing to <= B (the default space)."""

    representation = "perishable"

    def initial_bounds(self) -> Bounds:
        """A first guess only, verified after solving and widened when it binds: the
        critical-fractile level of lead-time demand, with a unit carried charged its holding
        cost plus its share of the outdating cost over its life (common practice)."""
        spec = self.spec
        h = self.model.carrying_cost(spec)
        q = spec.case_pack
        return Bounds(upper=max(order_up_to_level(spec, holding=h) + eoq_room(spec, holding=max(h, 1e-9)) + q, q))
