"""Tailored base-surge policy (Allon & Van Mieghem 2010, "Global dual sourcing: tailored
base-surge allocation to near- and offshore production", Management Science 56(1)).

The regular supplier receives the same order r every period (the base); the expedited supplier
is used only when the expedited inventory position (net inventory + everything arriving within
le periods) is below S_e, and orders up to it (the surge). A finite long-run cost needs r below
mean demand, else stock grows without bound. (The paper's abstract: a constant rate from the
offshore source, the nearshore source used only when inventory is below a target; that the
target applies to the expedited inventory position is from memory.) Best (r, S_e) by exact-evaluation search: each stable r, with its best S_e.
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np

from invbench.envs.spec import InstanceSpec

from ._common import ClassicalPolicy, check_names, int_param, normalized_mean, order_param
from ._dual import order_pair, positions, profile_search, single_levels


class TailoredBaseSurgePolicy(ClassicalPolicy):
    """Order r regular units every period; expedite up to S_e."""

    name = "tailored_base_surge"
    models = ("dual_sourcing",)

    def __init__(self, spec: InstanceSpec, r: int, S_e: int) -> None:
        self.spec = spec
        self.r = order_param("r", r, spec)
        self.S_e = int_param("S_e", S_e)

    def params(self) -> dict[str, Any]:
        return {"r": self.r, "S_e": self.S_e}

    def act(self, obs: np.ndarray) -> np.ndarray:
        ip_e, _ = positions(obs, self.spec)
        qe = np.maximum(self.S_e - ip_e, 0)
        return order_pair(self.spec, np.full_like(qe, self.r), qe)

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "TailoredBaseSurgePolicy":
        check_names(cls.name, params, ("r", "S_e"))
        return cls(spec, **params)

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "TailoredBaseSurgePolicy":
        """r over 0 .. the largest integer below mean demand (the stable ones); the exact
        evaluator handles the unbounded stock a run of small demands builds by a far ceiling
        whose long-run share must be negligible (`policy_eval.evaluate_exact`)."""
        from ._search import ExactScorer

        scorer = ExactScorer(spec, lambda x: cls(spec, x[0], x[1]), progress=progress,
                             desc=cls.name, max_states=max_states)
        try:
            s_e, _ = single_levels(spec)
            mean = normalized_mean(spec)
            hi = min(max(int(math.ceil(mean)) - 1, 0), spec.order_cap_units)
            start = max(0, int(mean - math.sqrt(spec.demand.var)))
            profile_search((0, hi), min(start, hi), (s_e,), (1,), lambda r, y: scorer((r, y[0])), lambda y: y)
            r, S_e = scorer.best_point()
            pol = cls(spec, r, S_e)
            pol.optimum = scorer.optimum((r, S_e), note="best S_e for each stable constant order r, then the best r")
        finally:
            scorer.close()
        return pol
