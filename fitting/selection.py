"""Choosing one demand law per item: AIC over the three fits, a distance to the Kaplan–Meier
curve as goodness of fit, and the warnings a planner should see (heavy censoring, few days,
an undefined upper tail, gaps in the dates).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from invbench.envs.errors import SpecError

from .estimators import FAMILIES, Fit, Sample, fit_all
from .reading import ItemHistory

#: Share of stock-out days above which the fits lean heavily on the model's tail.
HEAVY_CENSORING = 0.3
#: Fewer days without a stock-out than this and the estimates are too loose to trust.
MIN_EXACT_DAYS = 30


@dataclass
class ItemFit:
    """The fits of one item, the one chosen and why, and its warnings."""

    item: str
    days: int
    censored_days: int
    sales_mean: float
    fits: dict[str, Fit]
    chosen: str
    distances: dict[str, float]
    warnings: list[str] = field(default_factory=list)
    missing_days: int = 0

    @property
    def censored_share(self) -> float:
        return self.censored_days / self.days if self.days else math.nan

    @property
    def chosen_fit(self) -> Fit:
        return self.fits[self.chosen]

    def to_dict(self) -> dict[str, Any]:
        f = self.chosen_fit
        return {"item": self.item, "chosen": self.chosen, "mean": f.mean, "variance": f.variance,
                "demand": f.demand, "days": self.days, "censored_days": self.censored_days,
                "censored_share": self.censored_share, "missing_days": self.missing_days,
                "sales_mean": self.sales_mean, "distance": _num(self.distances[self.chosen]),
                "fits": {k: {**v.to_dict(), "distance": _num(self.distances[k])} for k, v in self.fits.items()},
                "warnings": list(self.warnings)}


def _num(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None


def km_distance(fit: Fit, km: Fit) -> float:
    """Largest gap between the fit's CDF and the Kaplan–Meier CDF at 0..max sales - 1.

    A Kolmogorov-type distance that respects censoring (the plain empirical CDF of the sales
    would not: it is biased low by the stock-out days). The last point is left out because
    there the Kaplan–Meier CDF is 1 by construction.
    """
    if not (fit.usable and km.usable) or len(km.cdf_head) < 2:
        return math.nan
    return float(np.max(np.abs(fit.cdf_head[:-1] - km.cdf_head[:-1])))


def choose(fits: dict[str, Fit], family: str = "auto") -> tuple[str, str]:
    """(chosen family, note). `auto`: smallest AIC, ties to fewer parameters; a forced family
    that cannot be used on this item falls back to `auto` with a note."""
    if family != "auto":
        if fits[family].usable:
            return family, ""
        note = f"{family} cannot be used ({fits[family].note}); chosen by AIC instead"
    else:
        note = ""
    usable = [f for f in fits.values() if f.usable]
    best = min(usable, key=lambda f: (f.aic, f.n_params, FAMILIES.index(f.family)))
    return best.family, note


def fit_item(h: ItemHistory, family: str = "auto") -> ItemFit:
    """Fit the three laws to one item's history and choose one."""
    s = Sample.from_days(h.units, h.censored)
    fits = fit_all(s)
    km = fits["kaplan_meier"]
    if not any(f.usable for f in fits.values()):
        # every day a stock-out: there is no exact observation to build any law on
        raise SpecError(f"item {h.name!r}: all {h.days} days are stock-outs; no demand law can be fitted")
    chosen, note = choose(fits, family)
    distances = {k: km_distance(f, km) for k, f in fits.items()}
    warnings = [note] if note else []
    share = s.n_censored / h.days
    if share > HEAVY_CENSORING:
        warnings.append(f"heavy censoring: stock ran out on {100 * share:.0f}% of days "
                        f"(over {100 * HEAVY_CENSORING:.0f}%); the fitted mean rests on the model's tail")
    if s.n_exact < MIN_EXACT_DAYS:
        warnings.append(f"too few data: {s.n_exact} days without a stock-out (at least {MIN_EXACT_DAYS} advised)")
    # the tail placement changes only the written law, so it is a warning only when Kaplan–Meier is written
    if chosen == "kaplan_meier" and km.tail_mass > 0:
        warnings.append(f"largest sales value {s.max_value} is censored: Kaplan–Meier leaves "
                        f"P(D > {s.max_value}) = {km.tail_mass:.3f} undefined; that mass is put at "
                        f"{s.max_value} (a lower bound)")
    if s.max_value == 0:
        warnings.append("all sales are 0: demand is written as always 0")
    if h.missing_days:
        warnings.append(f"{h.missing_days} days missing between the first and last date; they are "
                        "left out, not counted as 0 sales")
    return ItemFit(h.name, h.days, s.n_censored, float(np.mean(h.units)), fits, chosen, distances,
                   warnings, h.missing_days)
