"""Base-stock policies of the serial chain: echelon base-stock (given or optimised levels), the
Shang & Song (2003) heuristic levels, and installation base-stock.

Echelon base-stock: stage j orders up to s_j on its echelon inventory position (everything at
and in transit to stages 1..j, minus backorders). Costs come from the exact formula in
`baselines/clark_scarf.py` wherever no order cap can bind; otherwise from exact evaluation.
"""
from __future__ import annotations

from typing import Any, Sequence

import numpy as np

from invbench.baselines import clark_scarf as cs
from invbench.envs.errors import SpecError
from invbench.envs.models.serial.model import blocks
from invbench.envs.spec import InstanceSpec

from ._common import ClassicalPolicy, Optimum, as_states, check_names, int_param


def level_list(name: str, v: Any, spec: InstanceSpec) -> list[int]:
    """One integer >= 0 per stage (stage 1 first), or SpecError naming the parameter."""
    n = len(spec.lead_times)
    if isinstance(v, (str, bytes)) or not isinstance(v, (list, tuple, np.ndarray)) or len(v) != n:
        raise SpecError(f"param.{name}: must be a list of {n} integers >= 0 (one per stage, stage 1 first), got {v!r}")
    return [int_param(f"{name}[{i}]", x, lo=0) for i, x in enumerate(v)]


def stage_sums(spec: InstanceSpec, states: np.ndarray) -> np.ndarray:
    """[B, N]: each stage's stock plus what is in transit to it (installation position)."""
    return np.column_stack([states[:, c:c + w].sum(axis=1) for c, w in blocks(spec)])


def capped(spec: InstanceSpec, orders: np.ndarray) -> np.ndarray:
    caps = np.asarray(spec.model_def.caps(spec), dtype=np.int64)  # type: ignore[attr-defined]
    return np.clip(orders, 0, caps[None, :])


def echelon_orders(spec: InstanceSpec, levels: Sequence[int], obs: np.ndarray) -> np.ndarray:
    positions = np.cumsum(stage_sums(spec, as_states(obs, spec)), axis=1)
    return capped(spec, np.asarray(levels, dtype=np.int64)[None, :] - positions)


def cost_of_levels(spec: InstanceSpec, levels: Sequence[int], max_states: int | None = None) -> Optimum:
    """Exact cost of echelon levels: the formula where it applies, else exact evaluation."""
    if cs.formula_applies(spec, levels):
        ec = cs.echelon_cost(spec, levels)
        return Optimum(method="analytic", cost=ec.cost, parts=dict(ec.parts))
    from invbench.baselines.policy_eval import evaluate_exact

    kw = {} if max_states is None else {"max_states": max_states}
    ev = evaluate_exact(spec, EchelonBaseStockPolicy(spec, list(levels)), **kw)
    return Optimum(method="exact_evaluation", cost=ev.cost, parts=dict(ev.parts), evaluations=1)


def search_levels(spec: InstanceSpec, start: Sequence[int], to_levels: Any, desc: str,
                  progress: bool, max_states: int | None) -> tuple[tuple[int, ...], Optimum]:
    """Local pattern search over integer parameters, each candidate scored exactly."""
    from ._search import ExactScorer, pattern_search

    def evaluate(_spec: InstanceSpec, levels: Any, _max: int | None) -> Optimum:
        return cost_of_levels(spec, levels, max_states)

    scorer = ExactScorer(spec, to_levels, progress=progress, desc=desc, max_states=max_states,
                         evaluate=evaluate)
    try:
        point, _ = pattern_search(scorer, tuple(start), (1,) * len(start),
                                  lambda x: tuple(max(v, 0) for v in x))
        opt = scorer.optimum(point, note="local search from the Shang-Song levels")
    finally:
        scorer.close()
    return point, opt


class EchelonBaseStockPolicy(ClassicalPolicy):
    """Order up to s_j on stage j's echelon inventory position (stage 1 first)."""

    name = "echelon_base_stock"
    models = ("serial",)

    def __init__(self, spec: InstanceSpec, s: Sequence[int]) -> None:
        if spec.model not in self.models:
            raise SpecError(f"policy: {self.name} is for the serial model, got {spec.model!r}")
        self.spec = spec
        self.s = level_list("s", s, spec)

    def params(self) -> dict[str, Any]:
        return {"s": list(self.s)}

    def act(self, obs: np.ndarray) -> np.ndarray:
        return echelon_orders(self.spec, self.s, obs)

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "EchelonBaseStockPolicy":
        check_names(cls.name, params, ("s",))
        return cls(spec, params["s"])

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "EchelonBaseStockPolicy":
        """Best levels by a local search from the Shang & Song levels, every candidate costed
        exactly (the decomposition is not used: the search checks it)."""
        point, opt = search_levels(spec, cs.shang_song_levels(spec), lambda x: list(x), "echelon_base_stock",
                                   progress, max_states)
        pol = cls(spec, list(point))
        pol.optimum = opt
        return pol


class ShangSongPolicy(EchelonBaseStockPolicy):
    """Echelon base-stock with the Shang & Song (2003) newsvendor-bound heuristic levels."""

    name = "shang_song"

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "ShangSongPolicy":
        """No parameters: the levels follow from the instance. `s` (as `params()` reports them,
        e.g. from a saved policy) is accepted only when it equals those levels."""
        check_names(cls.name, params, (), ("s",))
        pol = cls.optimize(spec)
        if "s" in params and level_list("s", params["s"], spec) != list(pol.s):
            raise SpecError(f"param.s: the Shang-Song levels of this instance are {list(pol.s)}, got {params['s']!r}")
        return pol

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "ShangSongPolicy":
        lo, hi = cs.newsvendor_bounds(spec)
        pol = cls(spec, cs.shang_song_levels(spec))
        opt = cost_of_levels(spec, pol.s, max_states)
        opt.note = "levels: average of the newsvendor bounds (Shang & Song 2003)"
        opt.extra = {"lower_bounds": lo, "upper_bounds": hi}
        pol.optimum = opt
        return pol


class InstallationBaseStockPolicy(ClassicalPolicy):
    """Stage j orders up to r_j on its installation position: its stock plus what is in transit
    to it, minus the order the stage below places this period (the demand on it now).

    With levels r_j >= 0 this orders exactly what echelon base-stock with s_j = r_1 + .. + r_j
    orders in every state where no echelon position exceeds its level, which covers the long-run
    path from an empty start (Axsaeter & Rosling 1993, from memory; checked in the tests).
    """

    name = "installation_base_stock"
    models = ("serial",)

    def __init__(self, spec: InstanceSpec, r: Sequence[int]) -> None:
        if spec.model not in self.models:
            raise SpecError(f"policy: {self.name} is for the serial model, got {spec.model!r}")
        self.spec = spec
        self.r = level_list("r", r, spec)

    def params(self) -> dict[str, Any]:
        return {"r": list(self.r)}

    def act(self, obs: np.ndarray) -> np.ndarray:
        own = stage_sums(self.spec, as_states(obs, self.spec))
        caps = self.spec.model_def.caps(self.spec)  # type: ignore[attr-defined]
        out = np.zeros_like(own)
        below = np.zeros(len(own), dtype=np.int64)
        for j in range(own.shape[1]):
            out[:, j] = np.clip(self.r[j] - (own[:, j] - below), 0, caps[j])
            below = out[:, j]
        return out

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "InstallationBaseStockPolicy":
        check_names(cls.name, params, ("r",))
        return cls(spec, params["r"])

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "InstallationBaseStockPolicy":
        """Best levels by a local search from the differences of the Shang & Song levels; a
        candidate is costed as its equivalent echelon levels (cumulative sums)."""
        s = cs.shang_song_levels(spec)
        start = [max(s[0], 0)] + [max(s[j] - s[j - 1], 0) for j in range(1, len(s))]
        point, opt = search_levels(spec, start, lambda x: list(np.cumsum(x)), "installation_base_stock",
                                   progress, max_states)
        pol = cls(spec, list(point))
        pol.optimum = opt
        return pol
