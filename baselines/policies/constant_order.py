"""Constant-order policy: order r units every period, whatever the state.

Lost sales: best r by exact evaluation. Backorders: no constant order has a finite long-run
average cost (r < mean demand: the backlog grows without bound; r >= mean: stock grows, or at
r = mean the net inventory is a null-recurrent walk), so `optimize` refuses with a SpecError;
`from_params` still builds one for simulation over a finite horizon.
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np

from invbench.baselines.policy import legal_orders
from invbench.envs.errors import BudgetError, SpecError
from invbench.envs.spec import InstanceSpec

from ._common import ClassicalPolicy, as_states, check_names, normalized_mean, order_param

def evaluate_constant_order(spec: InstanceSpec, r: int, max_states: int | None = None) -> Any:
    """Exact evaluation of the constant order r under lost sales.

    Its reachable on-hand is unbounded (a run of small demands keeps adding stock); the exact
    evaluator then truncates the chain at a far stock level and accepts the result only if the
    long-run share of periods there is negligible (see `policy_eval.evaluate_exact`).
    """
    from invbench.baselines.policy_eval import evaluate_exact  # heavy; only when evaluating

    if spec.model_def.shortfall == "backordered":
        raise ValueError("evaluate_constant_order: no finite long-run cost under backorders")
    # Perishable stock is bounded by r x shelf life (everything older perishes), so any r is
    # stable there; under lost sales only r below mean demand is.
    if not spec.model_def.perishes and r > 0 and r >= normalized_mean(spec):
        raise BudgetError(f"constant order {r}: not below mean demand, stock grows without bound")
    kw = {} if max_states is None else {"max_states": max_states}
    return evaluate_exact(spec, ConstantOrderPolicy(spec, r), **kw)


class ConstantOrderPolicy(ClassicalPolicy):
    """Order the same r units (a case-pack multiple) every period."""

    name = "constant_order"
    models = ("lost_sales", "backorder", "perishable")
    lead_time_kinds = ("fixed", "in_sequence")

    def __init__(self, spec: InstanceSpec, r: int) -> None:
        self.spec = spec
        self.r = order_param("r", r, spec)

    def params(self) -> dict[str, Any]:
        return {"r": self.r}

    def act(self, obs: np.ndarray) -> np.ndarray:
        n = as_states(obs, self.spec).shape[0]
        return legal_orders(self.spec, np.full(n, self.r, dtype=np.int64))

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "ConstantOrderPolicy":
        check_names(cls.name, params, ("r",))
        return cls(spec, **params)

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "ConstantOrderPolicy":
        """Best r among the case-pack multiples below mean demand (the stable ones), by a
        local search from mean - one standard deviation with exact evaluation; the cost in r
        is taken as unimodal (common practice)."""
        if spec.model_def.shortfall == "backordered":
            raise SpecError("instance.model: constant_order cannot be optimised for backorders (no constant "
                            "order has a finite long-run average cost); give r yourself, or use base_stock")
        from ._search import ExactScorer, pattern_search

        q = spec.case_pack
        mean = normalized_mean(spec)
        k_max = max(int(math.ceil(mean / q)) - 1, 0)  # largest k with k*q < mean
        if spec.model_def.perishes:
            k_max = int(math.ceil(mean / q))  # waste makes r above the mean pointless
        k_max = min(k_max, spec.order_cap_units // q)
        start = min(max(int((mean - math.sqrt(spec.demand.var)) // q), 0), k_max)
        scorer = ExactScorer(spec, lambda x: x[0] * q, progress=progress, desc="constant_order",
                             max_states=max_states,
                             evaluate=lambda s, r, m: evaluate_constant_order(s, r, m))
        try:
            (k,), _ = pattern_search(scorer, (start,), (max(1, k_max // 4),),
                                     lambda x: (min(max(x[0], 0), k_max),))
            pol = cls(spec, k * q)
            pol.optimum = scorer.optimum((k,), note="local search on r; evaluated with a far stock ceiling")
        finally:
            scorer.close()
        return pol
