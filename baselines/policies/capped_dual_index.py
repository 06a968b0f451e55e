"""Capped dual-index policy (Sun & Van Mieghem 2019, "Robust dual sourcing inventory
management: optimality of capped dual index policies and smoothing", Manufacturing & Service
Operations Management).

Expedited order: (S_e - expedited inventory position)^+, the position counting the net
inventory and everything arriving within le periods. Regular order: min((S_r - regular
inventory position)^+, r), the position counting the net inventory and everything in transit
before this period's orders, and r the cap on the regular order. Both capped by max_order too.
With r at least the largest one-period demand the cap stops acting in steady state; a small r
smooths the regular orders towards the tailored base-surge constant order.
Best (S_e, S_r, r) by exact-evaluation search: for each cap r the best (S_e, S_r), then the
best r.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from invbench.envs.spec import InstanceSpec

from ._common import ClassicalPolicy, check_names, int_param, order_param
from ._dual import order_pair, positions, profile_search, single_levels


class CappedDualIndexPolicy(ClassicalPolicy):
    """Expedite up to S_e; order regular up to S_r, at most r units a period."""

    name = "capped_dual_index"
    models = ("dual_sourcing",)

    def __init__(self, spec: InstanceSpec, S_e: int, S_r: int, r: int) -> None:
        self.spec = spec
        self.S_e = int_param("S_e", S_e)
        self.S_r = int_param("S_r", S_r)
        self.r = order_param("r", r, spec)

    def params(self) -> dict[str, Any]:
        return {"S_e": self.S_e, "S_r": self.S_r, "r": self.r}

    def act(self, obs: np.ndarray) -> np.ndarray:
        ip_e, ip_r = positions(obs, self.spec)
        qe = np.maximum(self.S_e - ip_e, 0)
        qr = np.minimum(np.maximum(self.S_r - ip_r, 0), self.r)
        return order_pair(self.spec, qr, qe)

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "CappedDualIndexPolicy":
        check_names(cls.name, params, ("S_e", "S_r", "r"))
        return cls(spec, **params)

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "CappedDualIndexPolicy":
        """Caps r from 1 to the largest one-period demand (beyond it the cap never acts in
        steady state: the regular order then replaces at most one period's demand); r = 0 is
        single sourcing from the expedited supplier, a policy of its own."""
        from ._search import ExactScorer

        scorer = ExactScorer(spec, lambda x: cls(spec, x[1], x[2], x[0]), progress=progress,
                             desc=cls.name, max_states=max_states)
        try:
            s_e, s_r = single_levels(spec)
            dmax = spec.demand.pmf().support_max
            hi = max(1, min(spec.order_cap_units, dmax))
            start = min(hi, max(1, int(round(spec.demand.mean))))
            profile_search((1, hi), start, (s_e, s_r), (1, 1), lambda r, y: scorer((r, y[0], y[1])),
                           lambda y: y)
            r, S_e, S_r = scorer.best_point()
            pol = cls(spec, S_e, S_r, r)
            pol.optimum = scorer.optimum((r, S_e, S_r), note="best (S_e, S_r) for each cap r, then the best r")
        finally:
            scorer.close()
        return pol
