"""Exact space of lost sales with a random lead time (orders in sequence): the generic
sum-bounded space stepped over demand x cut-off. It has no structured build (the fast build
and any other structured path of `LostSalesSpace` assume a fixed lead time), so the MDP is
built by the one expectation routine.
"""
from __future__ import annotations

from invbench.envs.newsvendor import order_up_to_level

from ..exact_space import PEAK_BYTES_PER_NNZ, Bounds, ExactSpace, SizeEstimate, count_simplex_states, eoq_room


class RandomLeadTimeSpace(ExactSpace):
    """States [on-hand + sure arrival, orders out by age] with entries summing to <= B."""

    representation = "lost_sales_random_lead_time"

    def initial_bounds(self) -> Bounds:
        """As for a fixed lead time, from the backorder order-up-to level, here on demand over
        L + 1 periods mixed over the lead-time pmf; a first guess that `exact.solve` checks
        after solving and widens when it binds."""
        q = self.spec.case_pack
        return Bounds(upper=max(order_up_to_level(self.spec) + eoq_room(self.spec) + q, q))

    def estimate(self, b: Bounds) -> SizeEstimate:
        # As LostSalesSpace.estimate, times the cut-off values: for each, a pair has at most
        # min(available stock, max demand) + 1 next states.
        n, B, q = self.dim, b.upper, self.spec.case_pack
        states = count_simplex_states(n, B)
        dmax = self.spec.demand.pmf().support_max
        per_v = [count_simplex_states(n, B - v) for v in range(B + 1)]
        pairs = sum(per_v) // q + states
        cuts = self.extra_outcomes()
        transitions = cuts * (sum(c * (min(B, dmax) + 1) for v, c in enumerate(per_v)) // q + states)
        return SizeEstimate(states, pairs, transitions, transitions * PEAK_BYTES_PER_NNZ)
