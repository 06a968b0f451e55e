"""Demand distributions on the non-negative integers, with an exact face and a sampled face.

The exact face (`pmf()`) feeds the solvers; the sampled face (`sample()`) feeds simulators and
environments. Sampling is by inverse CDF on the same truncated pmf, so both faces describe one
distribution and common random numbers are simply common uniforms.
"""
from __future__ import annotations

import math
from contextlib import contextmanager
from contextvars import ContextVar
from dataclasses import dataclass, field
from typing import Any, Iterator, Mapping

import numpy as np
from scipy import stats

from .errors import BudgetError, SpecError
from .moments import PmfMoments

#: Upper tail mass that may be dropped when a pmf is truncated (per period).
TAIL_MASS = 1e-10

#: Default largest pmf length (demand values 0 .. N-1). Five million values hold about 40 MiB
#: per array and build in well under a second; the solver's own budget refuses instances far
#: smaller than that anyway. Raise it with `--max-demand-support N` on the command line or
#: `with support_limit(N):` in Python; the size is estimated from the distribution's
#: 1 - TAIL_MASS quantile (scipy's isf) before any array is allocated.
DEFAULT_MAX_SUPPORT = 5_000_000
_MAX_SUPPORT: ContextVar[int] = ContextVar("invbench_max_demand_support", default=DEFAULT_MAX_SUPPORT)

#: Above this many multiply-adds a convolution goes through the FFT (the direct sum is quadratic).
_DIRECT_CONVOLVE_MAX = 4_000_000


@dataclass(frozen=True)
class DiscretePmf(PmfMoments):
    """A pmf on 0..len(probs)-1; `truncation_mass` is the probability dropped beyond the end."""

    probs: np.ndarray
    truncation_mass: float = 0.0

    @property
    def support_max(self) -> int:
        return len(self.probs) - 1

    def normalized(self) -> np.ndarray:
        """Probabilities rescaled to sum to one (used by solvers; the dropped mass is reported)."""
        return self.probs / self.probs.sum()

    def cdf(self) -> np.ndarray:
        return np.cumsum(self.normalized())

    def convolve(self, n: int) -> "DiscretePmf":
        """Pmf of the sum of `n` independent copies, truncated again at the same tail mass."""
        if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 0:
            raise SpecError(f"periods: must be an integer >= 0, got {n!r}")
        check_support(n * (len(self.probs) - 1) + 1, f"demand over {n} periods")
        out = np.array([1.0])
        for _ in range(n):
            out = _convolve(out, self.probs)
        kept = _truncate(out, TAIL_MASS)
        dropped = -math.expm1(n * math.log1p(-self.truncation_mass)) + float(out[len(kept):].sum())
        return DiscretePmf(kept, float(max(dropped, 0.0)))


def _convolve(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    if len(a) * len(b) <= _DIRECT_CONVOLVE_MAX:
        return np.convolve(a, b)
    from scipy.signal import fftconvolve
    return np.clip(fftconvolve(a, b), 0.0, None)  # round-off of the FFT leaves tiny negatives


def _truncate(probs: np.ndarray, tail: float) -> np.ndarray:
    """Drop the upper tail while the dropped mass stays <= tail; trailing zeros always go."""
    probs = np.asarray(probs, dtype=float)
    rev_tail = np.cumsum(probs[::-1])[::-1]  # rev_tail[k] = P(X >= k)
    above = np.flatnonzero(rev_tail > tail)  # rev_tail never increases, so this is a prefix
    keep = int(above[-1]) + 1 if len(above) else 1
    return probs[:keep].copy()


def _pmf_from_scipy(dist: Any, what: str, fld: str) -> DiscretePmf:
    """Pmf of a scipy discrete distribution up to its 1 - TAIL_MASS quantile, sized before it is built."""
    with _scipy_guard(what, fld):
        hi = _support_end(float(dist.isf(TAIL_MASS)), what, dist)
        while dist.sf(hi) > TAIL_MASS:
            hi = 2 * hi + 1
            check_support(hi + 1, what)
        probs = _finite_probs(dist.pmf(np.arange(hi + 1)), what)
        beyond = float(dist.sf(hi))
        kept = _truncate(probs, TAIL_MASS - beyond)
    # the dropped mass summed directly: 1 - sum(kept) would carry the round-off of a long sum
    return _finish(kept, what, fld, dropped=float(probs[len(kept):].sum()) + beyond)


def _discretise(dist: Any, what: str, fld: str) -> DiscretePmf:
    """Round a continuous demand to the nearest integer; mass below 0.5 goes to 0."""
    with _scipy_guard(what, fld):
        q = float(dist.isf(TAIL_MASS))
        hi = _support_end(math.ceil(q) if math.isfinite(q) else q, what, dist)
        edges = np.arange(hi + 1) + 0.5
        cdf = dist.cdf(edges)
        probs = _finite_probs(np.diff(np.concatenate([[0.0], cdf])), what)
        beyond = float(dist.sf(edges[-1]))
        kept = _truncate(probs, TAIL_MASS - beyond)
    return _finish(kept, what, fld, dropped=float(probs[len(kept):].sum()) + beyond)


@contextmanager
def _scipy_guard(what: str, fld: str) -> Iterator[None]:
    """scipy's special functions overflow for extreme parameters: report that as the input's fault."""
    try:
        with np.errstate(all="ignore"):
            yield
    except ArithmeticError as e:
        raise SpecError(f"demand.{fld}: {what} is outside the range scipy can evaluate ({type(e).__name__})") from None


def _support_end(quantile: float, what: str, dist: Any) -> int:
    """Last index of the pmf array from the upper quantile; refused before anything is allocated."""
    if not math.isfinite(quantile):  # scipy gives up far out: size it from the mean and spread
        rough = float(dist.mean() + 20 * dist.std())
        if math.isfinite(rough):
            check_support(rough, what)
        raise SpecError(f"demand: {what} has no finite {1 - TAIL_MASS:.10f} quantile "
                        "(parameters outside the range scipy can evaluate)")
    hi = max(int(quantile), 0) + 2
    check_support(hi + 1, what)
    return hi


def _finite_probs(probs: np.ndarray, what: str) -> np.ndarray:
    if not np.all(np.isfinite(probs)) or probs.sum() <= 0:
        raise SpecError(f"demand: {what} gives no valid probabilities (parameters outside the range scipy can evaluate)")
    return np.clip(probs, 0.0, None)


def _finish(kept: np.ndarray, what: str, fld: str, dropped: float | None = None) -> DiscretePmf:
    """Refuse a demand with all its mass at 0: with nothing ever demanded there is nothing to decide.

    (Refused here rather than handed to the solver, whose iterations have nothing to converge on.)
    """
    if len(kept) <= 1:
        raise SpecError(f"demand.{fld}: all the mass of {what} is at 0 (P(demand > 0) <= {TAIL_MASS:g}), which "
                        "leaves nothing to decide; demand must be positive with some probability")
    return DiscretePmf(kept, float(max(1.0 - kept.sum(), 0.0)) if dropped is None else dropped)


def check_support(values: float, what: str) -> None:
    """Raise BudgetError when a pmf of `values` entries (0, 1, ..., values - 1) is over the limit."""
    limit = _MAX_SUPPORT.get()
    if not values <= limit:
        mib = 3 * 8 * float(values) / 2**20  # the array and two temporaries of the same length
        raise BudgetError(f"demand: {what} needs a pmf of about {_amount(values)} values (about {_amount(mib)} MiB), "
                          f"over the limit of {limit:,} values (raise it with --max-demand-support N, or in "
                          "Python `with invbench.envs.demand.support_limit(N):`)")


def _amount(x: float) -> str:
    x = float(x)
    return f"{x:,.0f}" if x < 1e15 else f"{x:.3g}"


def _show(v: Any) -> str:
    """repr cut to one short phrase, so a huge value cannot flood the one-line message."""
    r = repr(v)
    return r if len(r) <= 60 else r[:57] + "..."


@contextmanager
def support_limit(values: int) -> Iterator[None]:
    """Within the block, demand pmfs may hold up to `values` entries (default DEFAULT_MAX_SUPPORT)."""
    if isinstance(values, bool) or not isinstance(values, (int, np.integer)) or not 1 <= values <= 10**12:
        raise SpecError(f"max_demand_support: must be an integer in [1, 1e12], got {values!r}")
    token = _MAX_SUPPORT.set(int(values))
    try:
        yield
    finally:
        _MAX_SUPPORT.reset(token)


def _num(params: Mapping[str, Any], key: str, lo: float | None = None, hi: float | None = None,
         lo_open: bool = False, integer: bool = False) -> float:
    field_name = f"demand.{key}"
    rng_txt = _range_text(lo, hi, lo_open)
    kind = "an integer" if integer else "a number"
    if key not in params:
        raise SpecError(f"{field_name}: required, {kind} {rng_txt}")
    v = params[key]
    if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)):
        raise SpecError(f"{field_name}: must be {kind} {rng_txt}, got {_show(v)}")
    try:
        v = float(v)
    except OverflowError:
        v = math.inf
    if not math.isfinite(v):
        raise SpecError(f"{field_name}: must be a finite number {rng_txt}, got {v}")
    if integer and v != int(v):
        raise SpecError(f"{field_name}: must be an integer {rng_txt}, got {v:g}")
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
        name = self.distribution
        if not isinstance(name, str) or name not in DISTRIBUTIONS:
            raise SpecError(f"demand.distribution: must be one of {', '.join(DISTRIBUTIONS)}, got {_show(name)}")
        if not isinstance(self.params, Mapping):
            raise SpecError(f"demand: parameters must be a table, got {type(self.params).__name__}")
        req, opt, _ = DISTRIBUTIONS[name]
        for k in self.params:
            if not isinstance(k, str) or k not in req + opt:
                raise SpecError(f"demand.{_show(k) if not isinstance(k, str) else k[:40]}: unknown key for {name} (allowed: {', '.join(req + opt)})")
        object.__setattr__(self, "_pmf", _build(name, dict(self.params)))

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> "Demand":
        """Validated demand from a table; bad input raises SpecError, an oversized pmf BudgetError."""
        if not isinstance(d, Mapping):
            raise SpecError(f"demand: must be a table with a 'distribution' key, got {type(d).__name__}")
        d = dict(d)
        name = d.pop("distribution", None)
        if name is None:
            raise SpecError(f"demand.distribution: required, one of {', '.join(DISTRIBUTIONS)}")
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
        return _pmf_from_scipy(stats.poisson(mean), f"poisson(mean={mean:g})", "mean")
    if name == "negative_binomial":
        mean = _num(p, "mean", 0.0, lo_open=True)
        var = _num(p, "variance", 0.0, lo_open=True)
        if var <= mean:
            raise SpecError(f"demand.variance: must be > mean ({mean:g}) for the negative binomial, got {var:g}")
        n, prob = mean * mean / (var - mean), mean / var
        if not (0 < n < math.inf and 0 < prob < 1):
            raise SpecError(f"demand.variance: mean {mean:g} and variance {var:g} give no usable negative binomial "
                            f"(its n = mean^2 / (variance - mean) = {n:g} must be finite and > 0)")
        return _pmf_from_scipy(stats.nbinom(n, prob), f"negative_binomial(mean={mean:g}, variance={var:g})", "mean")
    if name == "geometric":
        mean = _num(p, "mean", 0.0, lo_open=True)
        return _pmf_from_scipy(stats.geom(1.0 / (1.0 + mean), loc=-1), f"geometric(mean={mean:g})", "mean")
    if name == "binomial":
        n = int(_num(p, "n", 1, 1e15, integer=True))  # beyond 1e15 scipy's binomial loses integer precision
        prob = _num(p, "p", 0.0, 1.0)
        return _pmf_from_scipy(stats.binom(n, prob), f"binomial(n={n}, p={prob:g})", "p")
    if name == "uniform":
        low = int(_num(p, "low", 0, integer=True))
        high = int(_num(p, "high", low, integer=True))
        check_support(high + 1, f"uniform(low={low}, high={high})")
        probs = np.zeros(high + 1)
        probs[low:] = 1.0 / (high - low + 1)
        return _finish(probs, f"uniform(low={low}, high={high})", "high", dropped=0.0)
    if name == "empirical":
        return _empirical(p)
    if name in ("normal", "gamma"):
        mean = _num(p, "mean", 0.0, lo_open=True)
        std = _num(p, "std", 0.0, lo_open=True)
        what = f"{name}(mean={mean:g}, std={std:g})"
        if name == "normal":
            return _discretise(stats.norm(mean, std), what, "mean")
        ratio = mean / std
        shape, scale = ratio * ratio, std * std / mean  # products overflow to inf, ** would raise
        if not (0 < shape < math.inf and 0 < scale < math.inf):
            raise SpecError(f"demand.std: {what} gives no usable gamma (shape (mean/std)^2 = {shape:g} and scale "
                            f"std^2/mean = {scale:g} must be finite and > 0)")
        return _discretise(stats.gamma(shape, scale=scale), what, "mean")
    raise SpecError(f"demand.distribution: must be one of {', '.join(DISTRIBUTIONS)}, got {name!r}")


def _number_list(key: str, raw: Any) -> np.ndarray:
    """A flat, non-empty list of finite non-negative numbers (booleans and strings refused)."""
    field_name = f"demand.{key}"
    if isinstance(raw, np.ndarray):
        if raw.ndim != 1 or raw.dtype.kind not in "iuf":
            raise SpecError(f"{field_name}: must be a flat list of numbers >= 0, got an array of {raw.dtype} "
                            f"with shape {raw.shape}")
    elif isinstance(raw, (list, tuple)):
        for v in raw:
            if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)):
                raise SpecError(f"{field_name}: must be a flat list of numbers >= 0, got the element {_show(v)}")
    else:
        raise SpecError(f"{field_name}: must be a non-empty list of numbers >= 0, got {type(raw).__name__}")
    if len(raw) == 0:
        raise SpecError(f"{field_name}: must be a non-empty list of numbers >= 0")
    try:
        arr = np.asarray(raw, dtype=float)
    except OverflowError:
        raise SpecError(f"{field_name}: values must be finite numbers >= 0 (one is too large for a float)") from None
    if not np.all(np.isfinite(arr)):
        raise SpecError(f"{field_name}: values must be finite numbers >= 0, not NaN or infinity")
    if np.any(arr < 0):
        raise SpecError(f"{field_name}: values must be >= 0, got {arr.min():g}")
    return arr


def _empirical(p: dict[str, Any]) -> DiscretePmf:
    if ("counts" in p) == ("pmf" in p):
        raise SpecError("demand: empirical needs exactly one of 'counts' (observed demands) or 'pmf'")
    key = "counts" if "counts" in p else "pmf"
    arr = _number_list(key, p[key])
    if key == "counts":
        if np.any(arr != np.round(arr)):
            raise SpecError("demand.counts: observed demands must be integers >= 0")
        check_support(arr.max() + 1, f"empirical counts up to {_amount(arr.max())}")
        probs = np.bincount(arr.astype(np.int64)).astype(float)
        probs /= probs.sum()
    else:
        if np.any(arr > 1):
            raise SpecError(f"demand.pmf: probabilities must be in [0, 1], got {arr.max():g}")
        if abs(arr.sum() - 1.0) > 1e-9:
            raise SpecError(f"demand.pmf: probabilities must sum to 1, got {arr.sum():.12g}")
        check_support(len(arr), f"an empirical pmf of {len(arr):,} values")
        probs = arr / arr.sum()
    return _finish(_truncate(probs, 0.0), f"empirical {key}", key, dropped=0.0)


def poisson(mean: float) -> Demand:
    return Demand("poisson", {"mean": mean})
