"""Dual-index policy (Veeraraghavan & Scheller-Wolf 2008, "Now or later: a simple policy for
effective dual sourcing in capacitated systems", Operations Research 56(4)).

Two order-up-to levels on two inventory positions: first the expedited order raises the
expedited inventory position (net inventory + everything arriving within le periods) to S_e;
then the regular order raises the regular inventory position (net + everything in transit,
including the expedited order just placed) to S_r >= S_e. Each order is capped by max_order.
The order of the two steps and the inclusion of the new expedited order are from memory.
Best (S_e, S_r) by exact-evaluation search: for each spread delta = S_r - S_e the best S_e
(the paper's separability: for a fixed spread the cost is a newsvendor-like function of S_e),
then the best spread.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec

from ._common import ClassicalPolicy, check_names, int_param
from ._dual import order_pair, positions, profile_search, single_levels


class DualIndexPolicy(ClassicalPolicy):
    """Expedite up to S_e on the expedited position, then order regular up to S_r."""

    name = "dual_index"
    models = ("dual_sourcing",)

    def __init__(self, spec: InstanceSpec, S_e: int, S_r: int) -> None:
        self.spec = spec
        self.S_e = int_param("S_e", S_e)
        self.S_r = int_param("S_r", S_r)
        if self.S_r < self.S_e:
            raise SpecError(f"param.S_r: must be an integer >= S_e ({self.S_e}), got {self.S_r}")

    def params(self) -> dict[str, Any]:
        return {"S_e": self.S_e, "S_r": self.S_r}

    def act(self, obs: np.ndarray) -> np.ndarray:
        ip_e, ip_r = positions(obs, self.spec)
        cap = self.spec.order_cap_units
        qe = np.minimum(np.maximum(self.S_e - ip_e, 0), cap)
        qr = np.maximum(self.S_r - ip_r - qe, 0)
        return order_pair(self.spec, qr, qe)

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "DualIndexPolicy":
        check_names(cls.name, params, ("S_e", "S_r"))
        return cls(spec, **params)

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "DualIndexPolicy":
        from ._search import ExactScorer

        scorer = ExactScorer(spec, lambda x: cls(spec, x[1], x[1] + x[0]), progress=progress,
                             desc=cls.name, max_states=max_states)
        try:
            s_e, s_r = single_levels(spec)
            d0 = max(s_r - s_e, 0)
            profile_search((0, max(2 * d0, 4)), d0, (s_e,), (1,), lambda d, y: scorer((d, y[0])),
                           lambda y: y)
            d, S_e = scorer.best_point()
            pol = cls(spec, S_e, S_e + d)
            pol.optimum = scorer.optimum((d, S_e), note="best S_e for each spread S_r - S_e, then the best spread")
        finally:
            scorer.close()
        return pol
