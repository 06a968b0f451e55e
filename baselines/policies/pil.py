"""Projected inventory level (PIL) policy, after van Jaarsveld & Arts, "Projected inventory level
policies for lost sales inventory systems" (2024).

The projected level of a state is the expected stock (on-hand under lost sales, net inventory
under backorders) at the moment an order placed now arrives, with only the orders already in
transit coming in (`_projection`). PIL orders the smallest case-pack multiple that lifts the
projected level plus the order to at least the target (clipped at the cap). Rounding up or to
the nearest unit gives the same family of policies, with targets shifted by half a unit.

Backorders: the projection is linear, position minus mean demand over L periods, so PIL is
base-stock with S = target + mean lead-time demand + case_pack - 0.5 (rounded); `optimize`
takes its target from the base-stock optimum. Lost sales: best target by exact evaluation on a
grid of quarter units.

Random lead time (orders in sequence): the projection runs over the mean lead time rounded to
whole periods, the pipeline arriving by the model's own cut-off (`_projection`); the target is
searched as for lost sales, for backorders too (the projection is no longer linear).
"""
from __future__ import annotations

from dataclasses import replace
from typing import Any

import numpy as np

from invbench.baselines.policy import legal_orders
from invbench.envs.spec import InstanceSpec

from ._common import (ClassicalPolicy, as_states, check_names, critical_ratio, fractile,
                      normalized_mean,
                      num_param)
from ._projection import StateCache, project_levels

#: Target grid of the lost-sales search, in units.
GRID = 0.25
#: Guards the rounding up against float noise in the projected level.
_EPS = 1e-9


def projected_level(spec: InstanceSpec, states: np.ndarray) -> np.ndarray:
    """Expected stock when an order placed now arrives, per state."""
    owner, level, prob = project_levels(spec, states)
    return np.bincount(owner, weights=prob * level, minlength=len(states))


class PILPolicy(ClassicalPolicy):
    """Order so the expected stock at the order's arrival reaches the target."""

    name = "pil"
    models = ("lost_sales", "backorder")
    lead_time_kinds = ("fixed", "in_sequence")

    def __init__(self, spec: InstanceSpec, target: float) -> None:
        self.spec = spec
        lo = 0.0 if spec.model_def.shortfall == "lost" else None
        self.target = num_param("target", target, lo)
        self._cache = StateCache()

    def params(self) -> dict[str, Any]:
        return {"target": self.target}

    def projected(self, obs: np.ndarray) -> np.ndarray:
        """Projected level of each observed state (cached per distinct state)."""
        states = as_states(obs, self.spec)
        return self._cache.get(states, lambda u: projected_level(self.spec, u).reshape(-1, 1))[:, 0]

    def act(self, obs: np.ndarray) -> np.ndarray:
        q = self.spec.case_pack
        gap = self.target - self.projected(obs)
        packs = np.ceil(gap / q - _EPS)
        return legal_orders(self.spec, np.maximum(packs, 0).astype(np.int64) * q)

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "PILPolicy":
        check_names(cls.name, params, ("target",))
        return cls(spec, **params)

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "PILPolicy":
        """Best target. Lost sales: local search from the one-period critical-fractile level by
        exact evaluation, in whole units then quarter units near the best; the cost in the
        target is taken as unimodal apart from flat stretches (common practice). Backorders:
        from the base-stock optimum (see the module docstring)."""
        from .base_stock import BaseStockPolicy

        if spec.model_def.shortfall == "backordered" and spec.lead_time_law is None:
            base = BaseStockPolicy.optimize(spec, progress=progress, max_states=max_states)
            mu_L = spec.lead_time * normalized_mean(spec)
            # Rounded: the float noise of mu_L (~1e-9) would only clutter the reported target.
            pol = cls(spec, round(base.S - mu_L - spec.case_pack + 0.5, 6))
            if base.optimum is not None:
                pol.optimum = replace(base.optimum, note=f"backorders: PIL equal to base-stock S={base.S}")
            return pol
        from ._search import ExactScorer, pattern_search

        start = fractile(spec.demand.pmf().cdf(), critical_ratio(spec))
        per = int(round(1 / GRID))
        cache = StateCache()  # projections do not depend on the target: share them

        def build(x: tuple[int, ...]) -> "PILPolicy":
            pol = cls(spec, x[0] * GRID)
            pol._cache = cache
            return pol

        scorer = ExactScorer(spec, build, progress=progress, desc="pil", max_states=max_states)
        try:
            # Cost is piecewise constant in the target: whole units first, looking past flat
            # stretches, then the quarter-unit grid within a unit of the best.
            clamp = lambda x: (max(x[0], 0),)  # noqa: E731
            pattern_search(lambda x: scorer((x[0] * per,)), (start,), (1,), clamp, patience=2)
            (k,) = scorer.best_point()
            for j in range(-per + 1, per):
                scorer(clamp((k + j,)))
            (k,) = scorer.best_point()
            pol = cls(spec, k * GRID)
            pol.optimum = scorer.optimum((k,), note=f"search on the target, grid {GRID:g}")
        finally:
            scorer.close()
        return pol
