"""The random inputs of one period: demand, plus any other input a model declares (the cut-off
of a random lead time), each independent of the others.

Exact face: every joint value with its probability (`outcomes`, used by the one expectation
routine of the solver and of exact evaluation). Sampled face: values from uniforms, each input
from its own stream (env, vector env, simulator), so a seed's demand stream is the same
whatever else is drawn: common random numbers with the fixed-lead-time runs of that seed.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Sequence

import numpy as np

from .errors import SimulationOnly

if TYPE_CHECKING:
    from .spec import InstanceSpec


@dataclass(frozen=True)
class InputLaw:
    """One random input besides demand, passed to the model's step under `name`.

    Either an integer per row with pmf `probs` on 0..len-1 (inverse CDF of one uniform), or
    `width` independent 0/1 flags per row, flag j being 1 when its uniform is below
    `thresholds[j]`. `no_exact` says why an input has no exact face (then only sampled).
    """

    name: str
    probs: np.ndarray | None = None
    thresholds: np.ndarray | None = None
    no_exact: str = ""

    @property
    def width(self) -> int:
        """Uniforms per row: 1 for an integer value, else one per flag."""
        return 1 if self.thresholds is None else len(self.thresholds)

    def from_uniforms(self, u: np.ndarray) -> np.ndarray:
        """Values int64 [B] (or flags [B, width]) from uniforms [B] (or [B, width]) in [0, 1)."""
        if self.thresholds is not None:
            return (np.asarray(u) < self.thresholds).astype(np.int64)
        cdf = np.cumsum(self.probs)
        idx = np.searchsorted(cdf, u, side="right")
        return np.minimum(idx, len(cdf) - 1).astype(np.int64)

    def support(self) -> tuple[np.ndarray, np.ndarray]:
        """(values, probabilities) of the values with positive probability (exact face)."""
        if self.probs is None or self.no_exact:
            raise SimulationOnly(self.no_exact or f"{self.name}: this random input has no exact face")
        vals = np.flatnonzero(self.probs > 0)
        return vals.astype(np.int64), self.probs[vals]


@dataclass
class JointOutcomes:
    """Every joint value of the period's random inputs with positive probability."""

    demand: np.ndarray  # [K]
    probs: np.ndarray  # [K]
    extra: dict[str, np.ndarray] = field(default_factory=dict)  # name -> [K]

    @classmethod
    def of_demand(cls, pmf: np.ndarray) -> "JointOutcomes":
        """Demand alone, from a (normalized) pmf on 0..len-1."""
        dvals = np.flatnonzero(pmf > 0)
        return cls(dvals, pmf[dvals])

    def __len__(self) -> int:
        return len(self.demand)

    def tiled(self, rows: int) -> tuple[np.ndarray, dict[str, np.ndarray], np.ndarray]:
        """(demand, extra, weight) repeated for `rows` consecutive rows (row-major: all K
        outcomes of row 0, then of row 1, ...)."""
        return (np.tile(self.demand, rows), {k: np.tile(v, rows) for k, v in self.extra.items()},
                np.tile(self.probs, rows))


def period_outcomes(spec: "InstanceSpec", pmf: np.ndarray) -> JointOutcomes:
    """Demand (`pmf`, normalized) joint with the model's other random inputs of `spec`.

    Raises SimulationOnly when an input has no exact face. With no other input this is
    exactly `JointOutcomes.of_demand(pmf)`.
    """
    out = JointOutcomes.of_demand(pmf)
    for law in spec.model_def.random_inputs(spec):
        vals, probs = law.support()
        k = len(out)
        out = JointOutcomes(np.repeat(out.demand, len(vals)), np.repeat(out.probs, len(vals)) * np.tile(probs, k),
                            {**{n: np.repeat(v, len(vals)) for n, v in out.extra.items()}, law.name: np.tile(vals, k)})
    return out


def input_streams(seed: int | None, count: int) -> list[np.random.Generator]:
    """`count` generators for the inputs besides demand: children of the seed's SeedSequence,
    independent of the demand stream `np.random.default_rng(seed)` (fresh entropy for None)."""
    return [np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(i,))) for i in range(count)]


class PeriodInputs:
    """The sampled face for one instance: draws the inputs besides demand from their streams."""

    def __init__(self, spec: "InstanceSpec") -> None:
        self.laws = spec.model_def.random_inputs(spec)

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(law.name for law in self.laws)

    def streams(self, seed: int | None) -> list[np.random.Generator]:
        return input_streams(seed, len(self.laws))

    def draw(self, rngs: Sequence[np.random.Generator], size: int) -> dict[str, np.ndarray]:
        """One period of every input besides demand for `size` rows, one stream per input."""
        return {law.name: law.from_uniforms(rng.random(size if law.width == 1 else (size, law.width)))
                for law, rng in zip(self.laws, rngs)}

    def from_uniforms(self, uniforms: Sequence[np.ndarray]) -> dict[str, np.ndarray]:
        """The inputs from given uniforms (one array per input), e.g. shared across candidates."""
        return {law.name: law.from_uniforms(u) for law, u in zip(self.laws, uniforms)}
