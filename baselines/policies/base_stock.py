"""Base-stock (order-up-to S) policy: order (S - inventory position)^+, rounded down to the case
pack and clipped at the order cap. Backorders: critical-fractile S with its analytic cost;
lost sales: best S by exact evaluation, searched locally from the fractile level.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from invbench.envs.models.backorder.lead_time_cost import lead_time_cost
from invbench.baselines.policy import legal_orders
from invbench.envs.newsvendor import order_up_to_level
from invbench.envs.spec import InstanceSpec

from ._common import (ClassicalPolicy, Optimum, as_states, check_names, int_param,
                      inventory_position)


def fractile_level(spec: InstanceSpec) -> int:
    """Smallest S with P(D over L + 1 periods <= S) >= p / (p + h): the newsvendor level."""
    return order_up_to_level(spec)


def analytic_applies(spec: InstanceSpec) -> bool:
    """True when the order cap never binds in steady state, so the formula below is exact.

    In steady state the order is what the last period's demand took away, plus at most
    case_pack - 1 units carried over by the rounding. With lead times that may cross the
    formula does not hold (orders overtake), so it never applies there.
    """
    if spec.lead_time_kind == "crossing":
        return False
    dmax = spec.demand.pmf().support_max
    q = spec.case_pack
    return ((q - 1 + dmax) // q) * q <= spec.order_cap_units


def backorder_cost(spec: InstanceSpec, S: int) -> Optimum:
    """Long-run average cost per period of base-stock S under backorders (formula).

    The position after ordering is uniform on S - q + 1 .. S for case pack q (it moves on a
    circle of q residues by a doubly stochastic kernel; Hadley & Whitin's (R, nQ) result,
    from memory) and is exactly S for q = 1; each position y costs G(y) from `lead_time_cost`.
    Ordering: every unit demanded is ordered once (unit cost x mean demand), and an order is
    placed with probability (1/q) * sum_{k=1..q} P(D >= k).
    """
    if spec.model_def.shortfall != "backordered":
        raise ValueError("backorder_cost: defined for the backorder model")
    q = spec.case_pack
    ys = np.arange(S - q + 1, S + 1)
    hold = float(lead_time_cost(spec.with_(shortage_cost=0.0), ys).mean())
    short = float(lead_time_cost(spec.with_(holding_cost=0.0), ys).mean())
    p = spec.demand.pmf().normalized()
    mean = float(np.dot(np.arange(len(p)), p))
    tail = 1.0 - np.cumsum(p)  # tail[k] = P(D > k)
    p_order = float(np.mean([tail[k - 1] if k - 1 < len(tail) else 0.0 for k in range(1, q + 1)]))
    ordering = spec.unit_order_cost * mean + spec.fixed_order_cost * p_order
    return Optimum(method="analytic", cost=hold + short + ordering,
                   parts={"holding": hold, "shortage": short, "ordering": ordering})


def best_backorder_level(spec: InstanceSpec) -> int:
    """S minimising the mean of G over the q positions S - q + 1 .. S (convex, so local)."""
    q = spec.case_pack
    S = fractile_level(spec) + (q - 1) // 2
    if q == 1:
        return S

    def window(level: int) -> float:
        return float(lead_time_cost(spec, np.arange(level - q + 1, level + 1)).mean())

    here = window(S)
    for d in (1, -1):
        while (nxt := window(S + d)) < here - 1e-15:
            S, here = S + d, nxt
    return S


class BaseStockPolicy(ClassicalPolicy):
    """Order up to S on the inventory position (net stock + pipeline)."""

    name = "base_stock"
    models = ("lost_sales", "backorder", "perishable")
    lead_time_kinds = ("fixed", "in_sequence", "crossing")

    def __init__(self, spec: InstanceSpec, S: int) -> None:
        self.spec = spec
        self.S = int_param("S", S, lo=0)

    def params(self) -> dict[str, Any]:
        return {"S": self.S}

    def act(self, obs: np.ndarray) -> np.ndarray:
        ip = inventory_position(as_states(obs, self.spec))
        return legal_orders(self.spec, np.maximum(self.S - ip, 0))

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "BaseStockPolicy":
        check_names(cls.name, params, ("S",))
        return cls(spec, **params)

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "BaseStockPolicy":
        """Best S. Backorders (cap not binding): the fractile/convex-window level, analytic
        cost (a random lead time in sequence: G on demand over L + 1 periods mixed over L,
        exact since the long-run cost is the mean of G over the position). Otherwise a local search on S from the fractile level with exact evaluation:
        the lost-sales cost in S is taken as unimodal (common practice)."""
        if spec.model_def.shortfall == "backordered" and analytic_applies(spec):
            S = best_backorder_level(spec)
            pol = cls(spec, S)
            pol.optimum = backorder_cost(spec, S)
            return pol
        from ._search import ExactScorer, pattern_search

        scorer = ExactScorer(spec, lambda x: cls(spec, x[0]), progress=progress,
                             desc="base_stock", max_states=max_states)
        try:
            start = fractile_level(spec)
            (S,), _ = pattern_search(scorer, (start,), (1,), lambda x: (max(x[0], 0),))
            pol = cls(spec, S)
            pol.optimum = scorer.optimum((S,), note="local search on S from the fractile level")
        finally:
            scorer.close()
        return pol
