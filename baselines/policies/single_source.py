"""Single sourcing in a dual-sourcing system: base-stock (order up to S on the inventory
position) with one supplier only, the other never used. The classical benchmark the
dual-sourcing policies are measured against (Veeraraghavan & Scheller-Wolf 2008 report how much
dual sourcing saves over it). Best S by a local search with exact evaluation from the
newsvendor level of that supplier's lead time.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from invbench.envs.spec import InstanceSpec

from ._common import ClassicalPolicy, check_names, int_param
from ._dual import order_pair, positions, single_levels


class SingleRegularPolicy(ClassicalPolicy):
    """Order up to S with the regular supplier only (everything in transit counts)."""

    name = "single_regular"
    models = ("dual_sourcing",)
    slot = 0  # which supplier: 0 regular, 1 expedited

    def __init__(self, spec: InstanceSpec, S: int) -> None:
        self.spec = spec
        self.S = int_param("S", S)

    def params(self) -> dict[str, Any]:
        return {"S": self.S}

    def act(self, obs: np.ndarray) -> np.ndarray:
        _, ip = positions(obs, self.spec)
        q = np.maximum(self.S - ip, 0)
        zero = np.zeros_like(q)
        return order_pair(self.spec, q, zero) if self.slot == 0 else order_pair(self.spec, zero, q)

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "SingleRegularPolicy":
        check_names(cls.name, params, ("S",))
        return cls(spec, **params)

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "SingleRegularPolicy":
        """Best S: the single-sourcing cost is convex in S (backorders; Zipkin 2000, from
        memory), so the local search from the newsvendor level finds it."""
        from ._search import ExactScorer, pattern_search

        scorer = ExactScorer(spec, lambda x: cls(spec, x[0]), progress=progress, desc=cls.name,
                             max_states=max_states)
        try:
            start = single_levels(spec)[1 - cls.slot]
            (S,), _ = pattern_search(scorer, (start,), (1,), lambda x: x)
            pol = cls(spec, S)
            pol.optimum = scorer.optimum((S,), note="local search on S from the newsvendor level")
        finally:
            scorer.close()
        return pol


class SingleExpeditedPolicy(SingleRegularPolicy):
    """Order up to S with the expedited supplier only (everything in transit counts)."""

    name = "single_expedited"
    slot = 1
