"""Proportional order-up-to (POUT) policy, after Disney, Maltz, Wang & Warburton, "Inventory
management for stochastic lead times with order crossovers" (EJOR 248, 2016).

Their rule orders the demand forecast plus 1/T_i of the net-stock gap and 1/T_w of the
work-in-progress gap; with T_i = T_w = T, a constant forecast (mean demand mu) and the target
position S = target net stock + target WIP + mu, this is

    order = mu + (S - mu - inventory position) / T,

rounded to the nearest unit, then down to the case pack and into [0, cap]. T = 1 is
base-stock with level S; a larger T smooths orders (and, with lead times that may cross, uses
only the position, which every order counts whether or not it has overtaken another).
`optimize` searches S (whole units) and T on a grid of quarter steps from 1, scoring each
candidate by exact evaluation, or by simulation with common random numbers where the instance
is simulated only.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from invbench.baselines.policy import legal_orders
from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec

from ._common import (ClassicalPolicy, as_states, check_names, int_param, inventory_position,
                      normalized_mean, num_param)

#: T grid of the search: 1 + k * T_STEP.
T_STEP = 0.25
#: Largest T searched (a very slow controller only lets the position drift).
T_MAX = 8.0


class POUTPolicy(ClassicalPolicy):
    """Mean demand plus (S - mean demand - inventory position) / T."""

    name = "pout"
    models = ("lost_sales", "backorder")
    lead_time_kinds = ("fixed", "in_sequence", "crossing")

    def __init__(self, spec: InstanceSpec, S: int, T: float) -> None:
        self.spec = spec
        self.S = int_param("S", S, lo=0)
        self.T = num_param("T", T, 1.0)
        if self.T > 1e6:
            raise SpecError(f"param.T: must be a number in [1, 1e6], got {self.T:g}")
        self._mu = normalized_mean(spec)

    def params(self) -> dict[str, Any]:
        return {"S": self.S, "T": self.T}

    def act(self, obs: np.ndarray) -> np.ndarray:
        ip = inventory_position(as_states(obs, self.spec))
        want = self._mu + (self.S - self._mu - ip) / self.T
        return legal_orders(self.spec, np.maximum(np.floor(want + 0.5), 0).astype(np.int64))

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "POUTPolicy":
        check_names(cls.name, params, ("S", "T"))
        return cls(spec, **params)

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "POUTPolicy":
        """Best (S, T) by a local search from the best base-stock level at T = 1; the cost is
        taken as unimodal along the searched directions (common practice)."""
        from ._search import ExactScorer, pattern_search
        from .base_stock import BaseStockPolicy

        base = BaseStockPolicy.optimize(spec, progress=progress, max_states=max_states)
        k_max = int(round((T_MAX - 1.0) / T_STEP))
        scorer = ExactScorer(spec, lambda x: cls(spec, x[0], 1.0 + x[1] * T_STEP), progress=progress,
                             desc="pout", max_states=max_states)
        try:
            clamp = lambda x: (max(x[0], 0), min(max(x[1], 0), k_max))  # noqa: E731
            (S, k), _ = pattern_search(scorer, (base.S, 0), (1, 4), clamp)
            pol = cls(spec, S, 1.0 + k * T_STEP)
            pol.optimum = scorer.optimum((S, k), note=f"local search on (S, T), T grid {T_STEP:g}, "
                                         f"from base-stock S={base.S}")
        finally:
            scorer.close()
        return pol
