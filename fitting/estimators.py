"""Demand estimators for daily sales with stock-outs: censored maximum likelihood (Poisson,
negative binomial) and the Kaplan–Meier estimator (non-parametric).

A stock-out day with sales x says only that demand was at least x: its likelihood term is
P(D >= x) = sf(x - 1) (right censoring). Days without a stock-out are exact observations.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import optimize, stats

#: Families fitted, in the order they are shown.
FAMILIES = ("poisson", "negative_binomial", "kaplan_meier")
#: Size parameter above which a negative binomial is reported as practically Poisson.
NB_POISSON_LIMIT = 1e6


@dataclass(frozen=True)
class Sample:
    """Daily sales compressed to counts per sales value: exact days and stock-out days."""

    values: np.ndarray
    exact: np.ndarray
    censored: np.ndarray

    @classmethod
    def from_days(cls, units: np.ndarray, censored: np.ndarray) -> "Sample":
        units = np.asarray(units, dtype=np.int64)
        cens = np.asarray(censored, dtype=bool)
        values = np.unique(units)
        idx = np.searchsorted(values, units)
        return cls(values, np.bincount(idx[~cens], minlength=len(values)),
                   np.bincount(idx[cens], minlength=len(values)))

    @property
    def max_value(self) -> int:
        return int(self.values.max())

    @property
    def n_exact(self) -> int:
        return int(self.exact.sum())

    @property
    def n_censored(self) -> int:
        return int(self.censored.sum())


@dataclass(frozen=True)
class Fit:
    """One fitted demand law. `demand` is its instance demand table, or None when not usable."""

    family: str
    demand: dict[str, Any] | None
    loglik: float
    n_params: int
    mean: float
    variance: float
    cdf_head: np.ndarray = field(repr=False)  # CDF at 0..max sales value, for distances
    note: str = ""
    tail_mass: float = 0.0  # Kaplan–Meier only: mass left undefined by censored largest values

    @property
    def usable(self) -> bool:
        return self.demand is not None

    @property
    def aic(self) -> float:
        """Akaike's criterion 2k - 2 log L on the censored-data likelihood (inf when unusable)."""
        return 2 * self.n_params - 2 * self.loglik if self.usable else math.inf

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {"family": self.family, "usable": self.usable,
                             "loglik": _num(self.loglik), "n_params": self.n_params,
                             "aic": _num(self.aic), "mean": _num(self.mean), "variance": _num(self.variance),
                             "demand": self.demand, "note": self.note}
        if self.family == "kaplan_meier":
            d["tail_mass"] = self.tail_mass
        return d


def _num(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None


def censored_loglik(logpmf: np.ndarray, logsf_below: np.ndarray, s: Sample) -> float:
    """Sum of exact * log P(D = x) + censored * log P(D >= x) over the sample's values."""
    ll = 0.0
    m = s.exact > 0
    ll += float(np.dot(s.exact[m], logpmf[m]))
    m = s.censored > 0
    ll += float(np.dot(s.censored[m], logsf_below[m]))
    return ll if not math.isnan(ll) else -math.inf


def dist_loglik(dist: Any, s: Sample, *params: float) -> float:
    """Censored log-likelihood of a scipy discrete distribution (frozen, or unfrozen + params).

    Unfrozen calls matter inside the optimisers: freezing costs more than the evaluation.
    """
    return censored_loglik(dist.logpmf(s.values, *params), dist.logsf(s.values - 1, *params), s)


def _unusable(family: str, n_params: int, s: Sample, note: str) -> Fit:
    return Fit(family, None, -math.inf, n_params, math.nan, math.nan,
               np.full(s.max_value + 1, math.nan), note)


def _mean_bounds(s: Sample) -> tuple[float, float]:
    # log-mean search interval; hitting the upper end means the data do not bound the mean
    return math.log(1e-8), math.log(100.0 * (s.max_value + 1))


def fit_poisson(s: Sample) -> Fit:
    """Censored Poisson MLE (equals the sample mean when no day is censored)."""
    if s.max_value == 0:
        return _unusable("poisson", 1, s, "all sales are 0")
    lo, hi = _mean_bounds(s)
    res = optimize.minimize_scalar(lambda t: -dist_loglik(stats.poisson, s, math.exp(t)),
                                   bounds=(lo, hi), method="bounded", options={"xatol": 1e-11})
    if hi - res.x < 1e-6:
        return _unusable("poisson", 1, s, "the mean is not bounded by the data (too much censoring)")
    mean = math.exp(res.x)
    d = stats.poisson(mean)
    return Fit("poisson", {"distribution": "poisson", "mean": mean}, -float(res.fun), 1, mean, mean,
               d.cdf(np.arange(s.max_value + 1)))


def _nbinom(mean: float, size: float) -> Any:
    return stats.nbinom(size, size / (size + mean))


def fit_negative_binomial(s: Sample, start_mean: float | None = None) -> Fit:
    """Censored negative-binomial MLE over (mean, size); variance = mean + mean^2 / size."""
    if s.max_value == 0:
        return _unusable("negative_binomial", 2, s, "all sales are 0")
    x = np.repeat(s.values, s.exact + s.censored).astype(float)
    m0 = start_mean if start_mean and math.isfinite(start_mean) else max(x.mean(), 0.1)
    v0 = x.var()
    size0 = m0 * m0 / (v0 - m0) if v0 > m0 * 1.05 else 10.0 * (m0 + 1)
    lo, hi = _mean_bounds(s)
    size_bounds = (math.log(1e-4), math.log(1e8))

    def nll(t: np.ndarray) -> float:
        mean, size = math.exp(t[0]), math.exp(t[1])
        return -dist_loglik(stats.nbinom, s, size, size / (size + mean))

    t0 = np.clip([math.log(m0), math.log(size0)], [lo, size_bounds[0]], [hi, size_bounds[1]])
    # maxfev caps the walk along the flat ridge towards the Poisson (size -> infinity)
    res = optimize.minimize(nll, t0, method="Nelder-Mead", bounds=[(lo, hi), size_bounds],
                            options={"xatol": 1e-8, "fatol": 1e-10, "maxfev": 3000})
    # polish the mean at the size found, so that it is precise even on that ridge
    log_size = float(res.x[1])
    res1 = optimize.minimize_scalar(lambda t: nll(np.array([t, log_size])), method="bounded",
                                    bounds=(max(lo, res.x[0] - 0.5), min(hi, res.x[0] + 0.5)),
                                    options={"xatol": 1e-11})
    if res1.fun <= res.fun:
        res = optimize.OptimizeResult(x=np.array([res1.x, log_size]), fun=res1.fun)
    if not math.isfinite(res.fun):
        return _unusable("negative_binomial", 2, s, "the likelihood could not be maximised")
    if hi - res.x[0] < 1e-6:
        return _unusable("negative_binomial", 2, s, "the mean is not bounded by the data (too much censoring)")
    mean, size = math.exp(res.x[0]), math.exp(res.x[1])
    var = mean + mean * mean / size
    cdf = _nbinom(mean, size).cdf(np.arange(s.max_value + 1))
    if size >= NB_POISSON_LIMIT:
        return Fit("negative_binomial", None, -float(res.fun), 2, mean, var, cdf,
                   f"no over-dispersion: the fit tends to the Poisson (size > {NB_POISSON_LIMIT:g})")
    demand = {"distribution": "negative_binomial", "mean": mean, "variance": var}
    return Fit("negative_binomial", demand, -float(res.fun), 2, mean, var, cdf)


def fit_kaplan_meier(s: Sample) -> Fit:
    """Kaplan–Meier pmf on 0..max sales (scipy.stats.ecdf on right-censored data).

    A stock-out day with sales x is censored at x - 0.5: demand is known to exceed x - 1, and
    the half keeps scipy's tie rule (censored values stay at risk at their own value) out of it.
    When the largest values are censored the estimator leaves P(D > max) undefined; that mass is
    put at the largest sales value (a lower bound) and reported as `tail_mass`.
    """
    if s.n_exact == 0:
        return _unusable("kaplan_meier", 0, s, "every day is a stock-out: no exact observation")
    exact = np.repeat(s.values, s.exact).astype(float)
    right = np.repeat(s.values, s.censored).astype(float) - 0.5
    res = stats.ecdf(stats.CensoredData(uncensored=exact, right=right))
    k = s.max_value
    sf = np.clip(res.sf.evaluate(np.arange(k + 1)), 0.0, 1.0)
    pmf = -np.diff(np.concatenate([[1.0], sf]))
    tail = float(sf[-1])
    pmf[-1] += tail
    pmf = np.clip(pmf, 0.0, None)
    pmf /= pmf.sum()
    sf_below = np.cumsum(pmf[::-1])[::-1]  # sf_below[x] = P(D >= x)
    with np.errstate(divide="ignore"):
        ll = censored_loglik(np.log(pmf[s.values]), np.log(sf_below[s.values]), s)
    support = np.arange(k + 1)
    mean = float(np.dot(support, pmf))
    var = float(np.dot((support - mean) ** 2, pmf))
    n_params = int(np.count_nonzero(pmf)) - 1
    return Fit("kaplan_meier", {"distribution": "empirical", "pmf": pmf.tolist()}, ll, n_params, mean, var,
               np.cumsum(pmf), tail_mass=tail)


def fit_all(s: Sample) -> dict[str, Fit]:
    """The three fits of one item, keyed by family."""
    p = fit_poisson(s)
    return {"poisson": p, "negative_binomial": fit_negative_binomial(s, p.mean if p.usable else None),
            "kaplan_meier": fit_kaplan_meier(s)}
