"""BSP-low-EW for perishable goods: base-stock on the inventory position less the expected
waste, with a second order-up-to level when that position is low.

Haijema & Minner (2019), "Improved ordering of perishables: the value of stock-age
information", International Journal of Production Economics 209, 316-324, name this policy
and report it close to optimal and ahead of the other stock-age dependent rules they test
(abstract, read). We could not read the paper's definition: the rule below is from memory
(also as used as the perishable benchmark in Temizöz et al., deep controlled learning for
inventory control; from memory), and these points are our interpretation:

* EW, the expected waste, is the expected number of units outdated in the L periods before an
  order placed now arrives (periods t .. t+L-1), given the current stock by age and the
  pipeline. Orders placed in those periods arrive later and cannot change it, FIFO or LIFO, so
  it is exact; it is computed with the model's own step function over the demand pmf
  (`_projection.project_states`), never a second copy of the rules. With L = 0 it is 0.
* y = inventory position - EW (stock and pipeline that are not expected to perish first).
  Order S1 - y when y < b (inventory low), else S2 - y; rounded to the nearest unit (halves
  up), at least 0, then to a legal order (case pack, cap).
* Nesting: with S1 = S2 = S the rule is BSP-EW (order-up-to S on IP - EW); it equals plain
  base-stock S only when EW = 0, i.e. for L = 0. For L >= 1 it does not nest base-stock.

Parameters: integers S1, S2 >= 0 and b >= 0; found by a local search with exact evaluation
from the best single level S1 = S2 (see `optimize`).
"""
from __future__ import annotations

from typing import Any

import numpy as np

from invbench.baselines.policy import legal_orders
from invbench.envs.newsvendor import order_up_to_level
from invbench.envs.spec import InstanceSpec

from ._common import ClassicalPolicy, as_states, check_names, int_param, inventory_position
from ._projection import StateCache, project_states

#: Guards the rounding of S - y against float noise in EW.
_EPS = 1e-9


def expected_waste(spec: InstanceSpec, states: np.ndarray) -> np.ndarray:
    """Expected units outdated before an order placed now arrives, per state (see above)."""
    _, _, _, exp = project_states(spec, np.asarray(states, dtype=np.int64), flows=("outdated",))
    return exp["outdated"]


class BSPLowEWPolicy(ClassicalPolicy):
    """Order up to S1 (position less expected waste below b) or S2 (otherwise)."""

    name = "bsp_low_ew"
    models = ("perishable",)

    def __init__(self, spec: InstanceSpec, S1: int, S2: int, b: int) -> None:
        self.spec = spec
        self.S1 = int_param("S1", S1, lo=0)
        self.S2 = int_param("S2", S2, lo=0)
        self.b = int_param("b", b, lo=0)
        self._cache = StateCache()

    def params(self) -> dict[str, Any]:
        return {"S1": self.S1, "S2": self.S2, "b": self.b}

    def waste(self, obs: np.ndarray) -> np.ndarray:
        """EW of each observed state (cached per distinct state)."""
        states = as_states(obs, self.spec)
        if self.spec.lead_time == 0:
            return np.zeros(len(states))
        return self._cache.get(states, lambda u: expected_waste(self.spec, u).reshape(-1, 1))[:, 0]

    def act(self, obs: np.ndarray) -> np.ndarray:
        states = as_states(obs, self.spec)
        y = inventory_position(states) - self.waste(states)
        target = np.where(y < self.b, self.S1, self.S2)
        raw = np.floor(target - y + 0.5 + _EPS).astype(np.int64)
        return legal_orders(self.spec, np.maximum(raw, 0))

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "BSPLowEWPolicy":
        check_names(cls.name, params, ("S1", "S2", "b"))
        return cls(spec, **params)

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "BSPLowEWPolicy":
        """Best (S1, S2, b) by exact evaluation: first S1 = S2 = S (BSP-EW; plain base-stock
        when L = 0) by a line search on S from the newsvendor level of demand over L + 1
        periods, with a unit held charged its holding cost plus 1/m of the outdating cost (as
        the model's exact space does; common practice); then a pattern search on the triple
        from (S, S, S). b stays in [0, max(S1, S2) + 1]: larger values all mean "always S1".
        A local search: the result is the best triple evaluated, not a certified optimum."""
        from ._search import ExactScorer, pattern_search

        cache = StateCache()  # EW does not depend on the parameters: share it

        def build(x: tuple[int, ...]) -> "BSPLowEWPolicy":
            pol = cls(spec, x[0], x[1], x[2])
            pol._cache = cache
            return pol

        def clamp(x: tuple[int, ...]) -> tuple[int, int, int]:
            s1, s2 = max(x[0], 0), max(x[1], 0)
            return s1, s2, min(max(x[2], 0), max(s1, s2) + 1)

        start = order_up_to_level(spec)  # with the model's carrying cost (holding + outdating share)
        scorer = ExactScorer(spec, build, progress=progress, desc="bsp_low_ew", max_states=max_states)
        try:
            (S,), single = pattern_search(lambda x: scorer((x[0],) * 3), (start,), (1,),
                                          lambda x: (max(x[0], 0),), patience=1)
            step = max(1, S // 4)
            pattern_search(scorer, (S, S, S), (step, step, step), clamp)
            point = scorer.best_point()
            pol = cls(spec, *point)
            level = "base_stock" if spec.lead_time == 0 else "bsp_ew"
            pol.optimum = scorer.optimum(point, note="local search on (S1, S2, b) from the best single "
                                         "level", **{level: {"S": S, "cost": single}})
        finally:
            scorer.close()
        return pol
