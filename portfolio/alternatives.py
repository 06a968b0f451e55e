"""Alternative demand laws for an item ("what if the fitted model is wrong?"): the law the policy
was chosen on is model A; each alternative B keeps everything else of the instance.

* `wider`: a law with A's mean and `variance_factor` times A's variance (negative binomial);
* `other_family`: the best other family (by AIC) fitted to the same sales history;
* `bootstrap`: A's family fitted again to a bootstrap resample of the item's own days (days drawn
  with replacement, each with its stock-out flag), `replicates` times.
* `random_lead_time`: A's demand, and a lead time that is L - 1, L or L + 1 periods with
  probability 1/4, 1/2, 1/4 (same mean L, variance 1/2; L = 0: 0 or 1 period, 1/2 each), orders
  arriving in sequence (Kaplan 1970's cut-off, as `lead_time = { pmf = [...] }` does it); only for
  models that take a random lead time.
"""
from __future__ import annotations

import zlib
from dataclasses import dataclass
from typing import Any

import numpy as np

from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec, default_max_order, spec_from_dict
from invbench.envs.demand import Demand

KINDS = ("wider", "other_family", "bootstrap", "random_lead_time")
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


def lead_time_spread(L: int) -> list[float]:
    """The pmf of the `random_lead_time` alternative of a fixed lead time L."""
    if L == 0:
        return [0.5, 0.5]
    return [0.0] * (L - 1) + [0.25, 0.5, 0.25]


def random_lead_time(a: InstanceSpec, item: str) -> Alternative | str:
    """A with its fixed lead time spread over L - 1, L, L + 1; a note (str) where that is not possible."""
    if not a.model_def.random_lead_time:
        return f"model {a.model} takes no random lead time"
    if a.lead_time_law is not None:
        return "the lead time is already random"
    pmf = lead_time_spread(int(a.lead_time))
    d = a.to_dict()
    d.update(name=f"{item}{SEPARATOR}random_lead_time", lead_time={"pmf": pmf})
    law = spec_from_dict(d).lead_time_law
    note = f"lead time {law.describe()}, mean {law.mean:g} (A: {a.lead_time}), in sequence"
    return Alternative(item, "random_lead_time", 0, spec_from_dict(d), note)


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
        if "random_lead_time" in kinds:
            add("random_lead_time", random_lead_time(a, item))
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
