"""Capped base-stock policy: order min((S - inventory position)^+, r), a case-pack multiple.

Xin (2021), "Understanding the performance of capped base-stock policies in lost-sales
inventory models" (Operations Research): with a well-chosen pair it is close to optimal for
lost sales, and it contains both base-stock (r large) and constant order (S large) as limits.
Lost sales: best (S, r) by a local search with exact evaluation, started from the best
base-stock level. Backorders: see `CappedBaseStockPolicy.optimize`.
"""
from __future__ import annotations

import math
from dataclasses import replace
from typing import Any

import numpy as np

from invbench.baselines.policy import legal_orders
from invbench.envs.spec import InstanceSpec

from ._common import (ClassicalPolicy, as_states, check_names, int_param, inventory_position,
                      order_param)
from .base_stock import BaseStockPolicy


class CappedBaseStockPolicy(ClassicalPolicy):
    """Order up to S on the inventory position, but never more than r units a period."""

    name = "capped_base_stock"
    models = ("lost_sales", "backorder", "perishable")
    lead_time_kinds = ("fixed", "in_sequence")

    def __init__(self, spec: InstanceSpec, S: int, r: int) -> None:
        self.spec = spec
        self.S = int_param("S", S, lo=0)
        self.r = order_param("r", r, spec)

    def params(self) -> dict[str, Any]:
        return {"S": self.S, "r": self.r}

    def act(self, obs: np.ndarray) -> np.ndarray:
        ip = inventory_position(as_states(obs, self.spec))
        return legal_orders(self.spec, np.minimum(np.maximum(self.S - ip, 0), self.r))

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "CappedBaseStockPolicy":
        check_names(cls.name, params, ("S", "r"))
        return cls(spec, **params)

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "CappedBaseStockPolicy":
        """Best (S, r). Lost sales: the search moves S by whole units and r by case packs,
        starting from the best base-stock level; the result is the best pair evaluated.

        Backorders: the uncapped base-stock optimum (r = largest steady-state order). A cap
        below the largest one-period demand leaves the backlog unbounded, so no finite exact
        evaluation exists for it; and without a fixed order cost base-stock is optimal among
        all policies anyway (Veinott 1965, with case packs as (R, nQ); from memory).
        """
        from ._search import ExactScorer, pattern_search

        q = spec.case_pack
        k_cap = spec.order_cap_units // q
        base = BaseStockPolicy.optimize(spec, progress=progress, max_states=max_states)
        # In steady state a base-stock order is at most one period's demand plus the rounding rest.
        dmax = spec.demand.pmf().support_max
        k_free = min(k_cap, (q - 1 + dmax) // q)
        if spec.model_def.shortfall == "backordered":
            pol = cls(spec, base.S, k_free * q)
            if base.optimum is not None:
                pol.optimum = replace(base.optimum, note="backorders: the uncapped base-stock optimum")
            return pol
        scorer = ExactScorer(spec, lambda x: cls(spec, x[0], x[1] * q), progress=progress,
                             desc="capped_base_stock", max_states=max_states)
        try:
            if base.optimum is not None:
                scorer.seed((base.S, k_free), base.optimum)  # the very same policy, already scored
            # Profile search: for each cap r the best S (1-D, warm-started from the nearest cap
            # tried), and over r the profile cost. Searching the pair jointly stalls in the
            # curved valley where a smaller cap wants a higher S. The cap starts near mean +
            # one standard deviation, where Xin's good caps sit, below the flat region where r
            # exceeds every steady-state order and changes nothing.
            k_mid = min(k_free, max(1, int(math.ceil((spec.demand.mean + math.sqrt(spec.demand.var)) / q))))
            s_step = max(1, int(math.sqrt(spec.demand.var * (spec.mean_lead_time + 1)) // 2))
            best_S: dict[int, int] = {}

            def profile(x: tuple[int, ...]) -> float:
                k = x[0]
                near = min(best_S, key=lambda kk: abs(kk - k)) if best_S else None
                s0 = base.S if near is None else best_S[near]
                (S,), c = pattern_search(lambda y: scorer((y[0], k)), (s0,), (s_step,),
                                         lambda y: (max(y[0], 0),))
                best_S[k] = S
                return c

            pattern_search(profile, (k_mid,), (max(1, k_mid // 4),), lambda x: (min(max(x[0], 1), k_cap),))
            S, k = scorer.best_point()
            pol = cls(spec, S, k * q)
            base_cost = base.optimum.cost if base.optimum else None
            pol.optimum = scorer.optimum((S, k), note="local search on (S, r) from the best base-stock level",
                                         base_stock={"S": base.S, "cost": base_cost})
            pol.optimum.evaluations += base.optimum.evaluations if base.optimum else 0
        finally:
            scorer.close()
        return pol
