"""Alternative demand laws for an item ("what if the fitted model is wrong?"): the law the policy
was chosen on is model A; each alternative B keeps everything else of the instance.

* `wider`: a law with A's mean and `variance_factor` times A's variance (negative binomial);
* `other_family`: the best other family (by AIC) fitted to the same sales history;
* `bootstrap`: A's family fitted again to a bootstrap resample of the item's own days (days drawn
  with replacement, each with its stock-out flag), `replicates` times.
A random lead time is not offered: invbench has no model with random lead times yet.
"""
from __future__ import annotations

import zlib
from dataclasses import dataclass
from typing import Any

import numpy as np

from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec, default_max_order, spec_from_dict
from invbench.envs.demand import Demand

KINDS = ("wider", "other_family", "bootstrap")
#: Said wherever the alternatives are listed, so the gap is never silent.
RANDOM_LEAD_TIME_NOTE = ("random lead time: left out, invbench has no model with random lead times yet")
#: Instance name of an alternative: ITEM~KIND or ITEM~bootstrap-R.
SEPARATOR = "~"
#: distribution written by `invbench fit` -> the family that wrote it
_FAMILY_OF = {"poisson": "poisson", "negative_binomial": "negative_binomial", "empirical": "kaplan_meier"}


@dataclass(frozen=True)
class Alternative:
    """One model B for an item: its instance, and how it was made."""

    item: str
    kind: str
    replicate: int  # 1..R for bootstrap, 0 otherwise
    spec: InstanceSpec
    note: str = ""

    @property
    def label(self) -> str:
        return f"{self.kind}-{self.replicate}" if self.kind == "bootstrap" else self.kind

    def to_dict(self) -> dict[str, Any]:
        return {"item": self.item, "alternative": self.kind, "replicate": self.replicate,
                "instance": self.spec.to_dict(), "note": self.note}


def _with_demand(a: InstanceSpec, demand: dict[str, Any], name: str) -> InstanceSpec:
    """A's instance with another law. Without an explicit cap on A, B gets the larger of the two
    default caps, so A's policy never places an order B refuses and B's optimum is not cut off."""
    d = a.to_dict()
    d.update(name=name, demand=demand)
    if a.max_order is None:
        d["max_order"] = max(a.order_cap_units, default_max_order(Demand.from_dict(demand), a.lead_time))
    return spec_from_dict(d)


def wider(a: InstanceSpec, item: str, factor: float) -> Alternative | str:
    """A's mean, `factor` times A's variance; a note (str) when no such law exists."""
    mean, var = a.demand.mean, a.demand.var
    if mean <= 0:
        return "demand is always 0"
    target = factor * var
    if target > mean * (1 + 1e-9):
        law = {"distribution": "negative_binomial", "mean": mean, "variance": target}
        note = f"negative binomial, variance {target:.4g} = {factor:g} x {var:.4g}"
    else:  # an under-dispersed A: the Poisson of the same mean already has more variance
        law = {"distribution": "poisson", "mean": mean}
        note = f"Poisson, variance {mean:.4g} (> {var:.4g})"
    return Alternative(item, "wider", 0, _with_demand(a, law, f"{item}{SEPARATOR}wider"), note)


def _sample(units: np.ndarray, censored: np.ndarray) -> Any:
    from invbench.fitting.estimators import Sample
    return Sample.from_days(units, censored)


def _fit(family: str, s: Any) -> Any:
    from invbench.fitting import estimators as est
    fn = {"poisson": est.fit_poisson, "negative_binomial": est.fit_negative_binomial,
          "kaplan_meier": est.fit_kaplan_meier}[family]
    return fn(s)


def other_family(a: InstanceSpec, item: str, history: Any) -> Alternative | str:
    """The usable fit with the smallest AIC among the families other than A's."""
    from invbench.fitting.estimators import fit_all

    fits = fit_all(_sample(history.units, history.censored))
    mine = _FAMILY_OF.get(a.demand.distribution)
    others = [f for f in fits.values() if f.usable and f.family != mine]
    if not others:
        return "no other family can be fitted to this history"
    best = min(others, key=lambda f: (f.aic, f.n_params))
    note = f"{best.family}, AIC {best.aic:.1f} (mean {best.mean:.4g}, variance {best.variance:.4g})"
    return Alternative(item, "other_family", 0, _with_demand(a, dict(best.demand), f"{item}{SEPARATOR}other_family"), note)


def bootstrap_laws(a: InstanceSpec, item: str, history: Any, replicates: int, seed: int) -> list[tuple[int, dict[str, Any], str]]:
    """(replicate, law, note) for each resample: A's family refitted (Poisson when that family
    cannot be fitted to a resample, e.g. a negative binomial without over-dispersion)."""
    from invbench.fitting.estimators import fit_all

    family = _FAMILY_OF.get(a.demand.distribution)
    n = len(history.units)
    if family is None:  # A is not a fitted law: take the family the history itself prefers
        fits = fit_all(_sample(history.units, history.censored))
        family = min((f for f in fits.values() if f.usable), key=lambda f: (f.aic, f.n_params)).family
    out = []
    for r in range(1, replicates + 1):
        # seeded by item name, not position: the same item gets the same resamples in any portfolio
        rng = np.random.default_rng([seed, zlib.crc32(item.encode("utf-8")), r])
        idx = rng.integers(0, n, size=n)
        s = _sample(history.units[idx], history.censored[idx])
        f = _fit(family, s)
        used = family
        if not f.usable:
            f, used = _fit("poisson", s), "poisson"
        if not f.usable:
            continue  # every resampled day a stock-out: no law at all
        out.append((r, dict(f.demand), f"{used}, mean {f.mean:.4g}, variance {f.variance:.4g}"))
    return out


def alternatives_for(a: InstanceSpec, item: str, history: Any | None, *, variance_factor: float = 2.0,
                     replicates: int = 3, seed: int = 0, kinds: tuple[str, ...] = KINDS) -> tuple[list[Alternative], list[str]]:
    """The alternatives of one item and a note for each one left out (why)."""
    alts: list[Alternative] = []
    notes: list[str] = []

    def add(kind: str, got: Alternative | str) -> None:
        if isinstance(got, str):
            notes.append(f"{kind}: {got}")
        else:
            alts.append(got)

    try:
        if "wider" in kinds:
            add("wider", wider(a, item, variance_factor))
        if history is None:
            notes += [f"{k}: no sales history for this item (give --sales)" for k in ("other_family", "bootstrap") if k in kinds]
            return alts, notes
        if "other_family" in kinds:
            add("other_family", other_family(a, item, history))
        if "bootstrap" in kinds and replicates > 0:
            for r, law, note in bootstrap_laws(a, item, history, replicates, seed):
                alts.append(Alternative(item, "bootstrap", r, _with_demand(a, law, f"{item}{SEPARATOR}bootstrap-{r}"), note))
    except SpecError as e:  # e.g. a law whose table would be too long: that alternative is left out
        notes.append(f"left out: {e}")
    return alts, notes
