"""(s, S) policy: when the inventory position is at or below s, order up to S (rounded down to
the case pack, clipped at the cap); otherwise order nothing.

Backorders: Zheng & Federgruen (1991) on G from `lead_time_cost`. The unit order cost adds
unit_cost x mean demand per period whatever (s, S) is, since every unit demanded is ordered
once, so it does not move the optimum and is added to the reported cost. With a case pack or
an order cap that can bind, that formula no longer describes the policy: the Zheng-Federgruen
point is then the start of a local search with exact evaluation. Lost sales: the same local
search, started from the Zheng-Federgruen point of the backorder twin of the instance; each
step is an exact evaluation, so it is meant for small instances (L <= 3 or so).
"""
from __future__ import annotations

from typing import Any

import numpy as np

from invbench.envs.models.backorder.lead_time_cost import lead_time_cost
from invbench.baselines.policy import legal_orders
from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec

from ._common import (ClassicalPolicy, Optimum, as_states, check_names, int_param,
                      inventory_position, normalized_mean)
from .zheng_federgruen import ZFResult, _Renewal, zheng_federgruen


def ss_backorder_cost(spec: InstanceSpec, s: int, S: int) -> Optimum:
    """Average cost of (s, S) under backorders, by renewal reward (case pack 1, cap not binding).

    The position after ordering spends a share m(j) / M(S - s) of periods at S - j.
    """
    n = S - s
    m = _Renewal(spec.demand.pmf().normalized()).masses(n)
    w = m / m.sum()
    ys = S - np.arange(n)
    hold = float(w @ lead_time_cost(spec.with_(shortage_cost=0.0), ys))
    short = float(w @ lead_time_cost(spec.with_(holding_cost=0.0), ys))
    ordering = spec.fixed_order_cost / float(m.sum()) + spec.unit_order_cost * normalized_mean(spec)
    return Optimum(method="analytic", cost=hold + short + ordering,
                   parts={"holding": hold, "shortage": short, "ordering": ordering}, note="Zheng & Federgruen (1991)")


def _formula_applies(spec: InstanceSpec, zf: ZFResult) -> bool:
    # Largest order: from just above s, a maximal demand drops the position to s + 1 - dmax.
    dmax = spec.demand.pmf().support_max
    return spec.case_pack == 1 and zf.S - zf.s - 1 + dmax <= spec.order_cap_units


class SSPolicy(ClassicalPolicy):
    """Reorder level s, order-up-to level S (s < S)."""

    name = "s_S"
    models = ("lost_sales", "backorder")
    lead_time_kinds = ("fixed", "in_sequence")

    def __init__(self, spec: InstanceSpec, s: int, S: int) -> None:
        self.spec = spec
        self.S = int_param("S", S, lo=0)
        self.s = int_param("s", s)
        if self.s >= self.S:
            raise SpecError(f"param.s: must be an integer < S ({self.S}), got {self.s}")

    def params(self) -> dict[str, Any]:
        return {"s": self.s, "S": self.S}

    def act(self, obs: np.ndarray) -> np.ndarray:
        ip = inventory_position(as_states(obs, self.spec))
        return legal_orders(self.spec, np.where(ip <= self.s, self.S - ip, 0))

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "SSPolicy":
        check_names(cls.name, params, ("s", "S"))
        return cls(spec, **params)

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "SSPolicy":
        """Best (s, S); see the module docstring for which method applies."""
        if spec.shortage_cost <= 0:
            if spec.model_def.shortfall == "backordered":
                raise SpecError("instance.shortage_cost: must be > 0 to optimise s_S under backorders")
            return cls(spec, -1, 0)  # nothing is worth stocking: never order
        if spec.holding_cost <= 0 and spec.fixed_order_cost > 0:
            # Free storage makes ever larger batches pay: the optimum runs off to infinity.
            raise SpecError("instance.holding_cost: must be > 0 to optimise s_S with a fixed order cost")
        twin = spec.model_def.backorder_twin(spec)
        zf = zheng_federgruen(twin)
        if spec.model_def.shortfall == "backordered" and _formula_applies(spec, zf):
            pol = cls(spec, zf.s, zf.S)
            pol.optimum = ss_backorder_cost(spec, zf.s, zf.S)
            return pol
        from ._search import ExactScorer, pattern_search

        S0 = max(zf.S, 1)
        gap0 = min(max(zf.S - zf.s, 1), S0 + 1)
        low_s = -1 if spec.model_def.shortfall == "lost" else None

        def clamp(x: tuple[int, ...]) -> tuple[int, int]:
            S, gap = max(x[0], 1), max(x[1], 1)
            if low_s is not None:
                gap = min(gap, S - low_s)
            return S, gap

        scorer = ExactScorer(spec, lambda x: cls(spec, x[0] - x[1], x[0]), progress=progress,
                             desc="s_S", max_states=max_states)
        try:
            step = max(1, gap0 // 4)
            (S, gap), _ = pattern_search(scorer, (S0, gap0), (step, step), clamp)
            pol = cls(spec, S - gap, S)
            pol.optimum = scorer.optimum((S, gap), note="local search on (S, S - s) from the "
                                         "Zheng-Federgruen point", start={"s": zf.s, "S": zf.S})
        finally:
            scorer.close()
        return pol
