"""Exact space of lost sales with a random lead time (orders in sequence): the sum-bounded
space of `LostSalesSpace`, stepped over demand x cut-off. It has no structured build or demand
split (both assume a fixed lead time), so the MDP is built by the one expectation routine.
"""
from __future__ import annotations

from typing import TYPE_CHECKING

from ..exact_space import Bounds, SizeEstimate
from .model import LostSalesSpace

if TYPE_CHECKING:
    from invbench.baselines.mdp import FiniteMDP
    from ..demand_split import DemandSplit


class RandomLeadTimeSpace(LostSalesSpace):
    """States [on-hand + sure arrival, orders out by age] with entries summing to <= B. The
    first bound comes from the backorder order-up-to level as for a fixed lead time, here on
    demand over L + 1 periods mixed over the lead-time pmf (`LostSalesSpace.initial_bounds`)."""

    representation = "lost_sales_random_lead_time"

    def estimate(self, b: Bounds) -> SizeEstimate:
        # for each cut-off value any stock up to B may arrive and meet demand
        return self.sizes(b, stock_meets_demand=lambda v: b.upper, outcomes=self.extra_outcomes())

    def fast_build(self, b: Bounds) -> "FiniteMDP | None":
        return None

    def demand_split(self) -> "DemandSplit | None":
        return None
