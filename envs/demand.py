"""Demand distributions on the non-negative integers, with an exact face and a sampled face.

The exact face (`pmf()`) feeds the solvers; the sampled face (`sample()`) feeds simulators and
environments. Sampling is by inverse CDF on the same truncated pmf, so both faces describe one
distribution and common random numbers are simply common uniforms.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np
from scipy import stats

from .errors import SpecError

#: Upper tail mass that may be dropped when a pmf is truncated (per period).
TAIL_MASS = 1e-10


@dataclass(frozen=True)
class DiscretePmf:
    """A pmf on 0..len(probs)-1; `truncation_mass` is the probability dropped beyond the end."""

    probs: np.ndarray
    truncation_mass: float = 0.0

    @property
    def support_max(self) -> int:
        return len(self.probs) - 1

    @property
    def mean(self) -> float:
        return float(np.dot(np.arange(len(self.probs)), self.probs))

    @property
    def var(self) -> float:
        k = np.arange(len(self.probs))
        m = self.mean
        return float(np.dot((k - m) ** 2, self.probs))

    def normalized(self) -> np.ndarray:
        """Probabilities rescaled to sum to one (used by solvers; the dropped mass is reported)."""
        return self.probs / self.probs.sum()

    def cdf(self) -> np.ndarray:
        return np.cumsum(self.normalized())

    def convolve(self, n: int) -> "DiscretePmf":
        """Pmf of the sum of `n` independent copies, truncated again at the same tail mass."""
        if n < 0:
            raise ValueError(f"convolve: n must be >= 0, got {n}")
        out = np.array([1.0])
        for _ in range(n):
            out = np.convolve(out, self.probs)
        kept = _truncate(out, TAIL_MASS)
        dropped = 1.0 - (1.0 - self.truncation_mass) ** n + (out.sum() - kept.sum())
        return DiscretePmf(kept, float(max(dropped, 0.0)))


def _truncate(probs: np.ndarray, tail: float) -> np.ndarray:
    """Drop the upper tail while the dropped mass stays <= tail; trailing zeros always go."""
    probs = np.asarray(probs, dtype=float)
    rev_tail = np.cumsum(probs[::-1])[::-1]  # rev_tail[k] = P(X >= k)
    keep = len(probs)
    while keep > 1 and rev_tail[keep - 1] <= tail:
        keep -= 1
    return probs[:keep].copy()


def _pmf_from_scipy(dist: Any) -> DiscretePmf:
    hi = int(dist.isf(TAIL_MASS)) + 2
    while dist.sf(hi) > TAIL_MASS:
        hi = 2 * hi + 1
    probs = dist.pmf(np.arange(hi + 1))
    kept = _truncate(probs, TAIL_MASS - float(dist.sf(hi)))
    return DiscretePmf(kept, float(max(1.0 - kept.sum(), 0.0)))


def _discretise(dist: Any) -> DiscretePmf:
    """Round a continuous demand to the nearest integer; mass below 0.5 goes to 0."""
    hi = int(math.ceil(dist.isf(TAIL_MASS))) + 2
    edges = np.arange(hi + 1) + 0.5
    cdf = dist.cdf(edges)
    probs = np.diff(np.concatenate([[0.0], cdf]))
    kept = _truncate(probs, TAIL_MASS - float(1.0 - cdf[-1]))
    return DiscretePmf(kept, float(max(1.0 - kept.sum(), 0.0)))


def _num(params: Mapping[str, Any], key: str, lo: float | None = None, hi: float | None = None,
         lo_open: bool = False, integer: bool = False) -> float:
    field_name = f"demand.{key}"
    if key not in params:
        raise SpecError(f"{field_name}: required")
    v = params[key]
    if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)):
        raise SpecError(f"{field_name}: must be a number, got {v!r}")
    v = float(v)
    if not math.isfinite(v):
        raise SpecError(f"{field_name}: must be finite, got {v}")
    if integer and v != int(v):
        raise SpecError(f"{field_name}: must be an integer, got {v}")
    rng_txt = _range_text(lo, hi, lo_open)
    if lo is not None and (v < lo or (lo_open and v <= lo)):
        raise SpecError(f"{field_name}: must be {rng_txt}, got {v:g}")
    if hi is not None and v > hi:
        raise SpecError(f"{field_name}: must be {rng_txt}, got {v:g}")
    return v


def _range_text(lo: float | None, hi: float | None, lo_open: bool) -> str:
    if lo is not None and hi is not None:
        return f"in [{lo:g}, {hi:g}]" if not lo_open else f"in ({lo:g}, {hi:g}]"
    if lo is not None:
        return f"> {lo:g}" if lo_open else f">= {lo:g}"
    return f"<= {hi:g}"


#: distribution name -> (required keys, optional keys, one-line description)
DISTRIBUTIONS: dict[str, tuple[tuple[str, ...], tuple[str, ...], str]] = {
    "poisson": (("mean",), (), "Poisson with the given mean"),
    "negative_binomial": (("mean", "variance"), (), "negative binomial by mean and variance (variance > mean)"),
    "geometric": (("mean",), (), "geometric on 0, 1, 2, ... with the given mean"),
    "binomial": (("n", "p"), (), "binomial with n trials and success probability p"),
    "uniform": (("low", "high"), (), "discrete uniform on low..high inclusive"),
    "empirical": ((), ("counts", "pmf"), "from observed demand counts (data) or a pmf on 0, 1, 2, ..."),
    "normal": (("mean", "std"), (), "normal rounded to the nearest integer, mass below 0.5 at 0"),
    "gamma": (("mean", "std"), (), "gamma rounded to the nearest integer, mass below 0.5 at 0"),
}


@dataclass(frozen=True)
class Demand:
    """One period's demand. Build with `Demand.from_dict({...})` or the helpers such as `poisson(5)`."""

    distribution: str
    params: Mapping[str, Any] = field(default_factory=dict)
    _pmf: DiscretePmf = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "_pmf", _build(self.distribution, dict(self.params)))

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> "Demand":
        if not isinstance(d, Mapping):
            raise SpecError("demand: must be a table with a 'distribution' key")
        d = dict(d)
        name = d.pop("distribution", None)
        if name is None:
            raise SpecError(f"demand.distribution: required, one of {', '.join(DISTRIBUTIONS)}")
        if name not in DISTRIBUTIONS:
            raise SpecError(f"demand.distribution: must be one of {', '.join(DISTRIBUTIONS)}, got {name!r}")
        req, opt, _ = DISTRIBUTIONS[name]
        for k in d:
            if k not in req + opt:
                allowed = ", ".join(req + opt)
                raise SpecError(f"demand.{k}: unknown key for {name} (allowed: {allowed})")
        return cls(name, d)

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {"distribution": self.distribution}
        for k, v in self.params.items():
            out[k] = list(v) if isinstance(v, (list, tuple, np.ndarray)) else v
        return out

    # exact face -------------------------------------------------------------------------
    def pmf(self) -> DiscretePmf:
        return self._pmf

    @property
    def mean(self) -> float:
        return self._pmf.mean

    @property
    def var(self) -> float:
        return self._pmf.var

    def lead_time_pmf(self, periods: int) -> DiscretePmf:
        """Pmf of total demand over `periods` periods (n-fold convolution)."""
        return self._pmf.convolve(periods)

    # sampled face -----------------------------------------------------------------------
    def sample(self, rng: np.random.Generator, size: int | tuple[int, ...]) -> np.ndarray:
        return self.from_uniforms(rng.random(size))

    def from_uniforms(self, u: np.ndarray) -> np.ndarray:
        """Inverse-CDF map from uniforms in [0, 1) to demands; the basis of common random numbers."""
        cdf = self._pmf.cdf()
        idx = np.searchsorted(cdf, u, side="right")
        return np.minimum(idx, len(cdf) - 1).astype(np.int64)

    def describe(self) -> str:
        ps = ", ".join(f"{k}={v}" for k, v in self.params.items() if k not in ("counts", "pmf"))
        return f"{self.distribution}({ps})" if ps else self.distribution


def _build(name: str, p: dict[str, Any]) -> DiscretePmf:
    if name == "poisson":
        mean = _num(p, "mean", 0.0, lo_open=True)
        return _pmf_from_scipy(stats.poisson(mean))
    if name == "negative_binomial":
        mean = _num(p, "mean", 0.0, lo_open=True)
        var = _num(p, "variance", 0.0, lo_open=True)
        if var <= mean:
            raise SpecError(f"demand.variance: must be > mean ({mean:g}) for the negative binomial, got {var:g}")
        return _pmf_from_scipy(stats.nbinom(mean * mean / (var - mean), mean / var))
    if name == "geometric":
        mean = _num(p, "mean", 0.0, lo_open=True)
        return _pmf_from_scipy(stats.geom(1.0 / (1.0 + mean), loc=-1))
    if name == "binomial":
        n = int(_num(p, "n", 1, integer=True))
        prob = _num(p, "p", 0.0, 1.0)
        return _pmf_from_scipy(stats.binom(n, prob))
    if name == "uniform":
        low = int(_num(p, "low", 0, integer=True))
        high = int(_num(p, "high", low, integer=True))
        probs = np.zeros(high + 1)
        probs[low:] = 1.0 / (high - low + 1)
        return DiscretePmf(probs, 0.0)
    if name == "empirical":
        return _empirical(p)
    if name in ("normal", "gamma"):
        mean = _num(p, "mean", 0.0, lo_open=True)
        std = _num(p, "std", 0.0, lo_open=True)
        if name == "normal":
            return _discretise(stats.norm(mean, std))
        shape = (mean / std) ** 2
        return _discretise(stats.gamma(shape, scale=std * std / mean))
    raise SpecError(f"demand.distribution: must be one of {', '.join(DISTRIBUTIONS)}, got {name!r}")


def _empirical(p: dict[str, Any]) -> DiscretePmf:
    if ("counts" in p) == ("pmf" in p):
        raise SpecError("demand: empirical needs exactly one of 'counts' (observed demands) or 'pmf'")
    key = "counts" if "counts" in p else "pmf"
    raw = p[key]
    if not isinstance(raw, (list, tuple, np.ndarray)) or len(raw) == 0:
        raise SpecError(f"demand.{key}: must be a non-empty list")
    try:
        arr = np.asarray(raw, dtype=float)
    except (TypeError, ValueError):
        raise SpecError(f"demand.{key}: must be a list of numbers") from None
    if not np.all(np.isfinite(arr)):
        raise SpecError(f"demand.{key}: must not contain NaN or infinity")
    if np.any(arr < 0):
        raise SpecError(f"demand.{key}: values must be >= 0")
    if key == "counts":
        if np.any(arr != np.round(arr)):
            raise SpecError("demand.counts: observed demands must be integers >= 0")
        probs = np.bincount(arr.astype(np.int64)).astype(float)
        probs /= probs.sum()
    else:
        if np.any(arr > 1):
            raise SpecError("demand.pmf: probabilities must be in [0, 1]")
        if abs(arr.sum() - 1.0) > 1e-9:
            raise SpecError(f"demand.pmf: probabilities must sum to 1, got {arr.sum():.12g}")
        probs = arr / arr.sum()
    return DiscretePmf(_truncate(probs, 0.0), 0.0)


def poisson(mean: float) -> Demand:
    return Demand("poisson", {"mean": mean})
