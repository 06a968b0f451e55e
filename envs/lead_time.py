"""Random lead times: the table `lead_time = { pmf = [p0, p1, ...] }` of an instance.

p_k is the probability that an order takes k periods. By default orders never cross (Kaplan
1970): each period an independent cut-off A is drawn and every order placed at least A periods
ago arrives. With survival S(k) = P(L > k), an order placed in period s is still out after k
periods iff A_s > 0, A_{s+1} > 1, ..., A_{s+k} > k, so P(L > k) = prod_{j<=k} P(A > j) and the
cut-off law is P(A > j) = S(j) / S(j - 1). That is a distribution only when the hazard
p_k / P(L >= k) never falls as k grows; other pmfs are refused (or need `crossing = true`).
With `crossing = true` each order's lead time is drawn on its own: an order k periods old
arrives with probability equal to the hazard at k, independently of the others, so orders may
overtake each other (simulation only).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Mapping

import numpy as np

from .moments import PmfMoments
from .errors import SpecError

if TYPE_CHECKING:
    from .demand import Demand, DiscretePmf

#: Longest lead time a table may give (as for a fixed lead time).
MAX_LEAD_TIME = 50
#: |sum of the probabilities - 1| allowed (hand-written tables such as thirds).
SUM_TOLERANCE = 1e-6
#: A hazard may fall by at most this much (round-off) before the pmf is refused.
HAZARD_TOLERANCE = 1e-9
KEYS = ("pmf", "crossing")


@dataclass(frozen=True)
class LeadTimePmf(PmfMoments):
    """A lead-time pmf on 0..len(probs)-1 (the last entry > 0) and how orders arrive."""

    probs: tuple[float, ...]
    crossing: bool = False

    @property
    def longest(self) -> int:
        return len(self.probs) - 1

    def survival(self) -> np.ndarray:
        """S(k) = P(L > k) for k = 0..longest, summed from the tail (no cancellation)."""
        p = np.asarray(self.probs)
        return np.concatenate([np.cumsum(p[::-1])[::-1][1:], [0.0]])

    def hazards(self) -> np.ndarray:
        """h_k = P(L = k | L >= k) for k = 0..longest (h_longest = 1)."""
        p = np.asarray(self.probs)
        before = np.concatenate([[1.0], self.survival()[:-1]])  # P(L >= k)
        return np.minimum(p / before, 1.0)

    def cutoff_pmf(self) -> np.ndarray:
        """P(A = j), j = 0..longest, for the non-crossing construction."""
        S = self.survival()
        prev = np.concatenate([[1.0], S[:-1]])
        above = S / prev  # P(A > j); prev > 0 for j <= longest since the last entry is > 0
        pmf = np.clip(np.concatenate([[1.0], above[:-1]]) - above, 0.0, None)
        return pmf / pmf.sum()

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {"pmf": list(self.probs)}
        if self.crossing:
            d["crossing"] = True
        return d

    def describe(self) -> str:
        txt = "pmf(" + ",".join(f"{p:g}" for p in self.probs) + ")"
        return txt + (" crossing" if self.crossing else "")


def parse_lead_time(v: Any, model_name: str, allowed: bool) -> LeadTimePmf:
    """A lead-time table checked, or SpecError naming `instance.lead_time...` and the range."""
    fixed = f"an integer in [0, {MAX_LEAD_TIME}]"
    if not allowed:
        raise SpecError(f"instance.lead_time: must be {fixed} (a pmf table is allowed for the lost_sales "
                        f"and backorder models only), got {_show(v)}")
    if isinstance(v, LeadTimePmf):
        return v
    if not isinstance(v, Mapping):
        raise SpecError(f"instance.lead_time: must be {fixed} or a table {{ pmf = [p0, p1, ...] }}, got {_show(v)}")
    for k in v:
        if k not in KEYS:
            name = k[:40] if isinstance(k, str) else _show(k)
            raise SpecError(f"instance.lead_time.{name}: unknown key of a lead-time table (allowed: pmf, crossing)")
    crossing = v.get("crossing", False)
    if not isinstance(crossing, (bool, np.bool_)):
        raise SpecError(f"instance.lead_time.crossing: must be true or false, got {_show(crossing)}")
    probs = _probs(v.get("pmf"))
    law = LeadTimePmf(probs, bool(crossing))
    if not crossing:
        _check_hazards(law)
    return law


def _probs(raw: Any) -> tuple[float, ...]:
    name = "instance.lead_time.pmf"
    rule = (f"a list of 1 to {MAX_LEAD_TIME + 1} probabilities >= 0 (entry k: P(lead time = k)) "
            f"summing to 1 within {SUM_TOLERANCE:g}")
    if raw is None:
        raise SpecError(f"{name}: required, {rule}")
    if isinstance(raw, (str, bytes)) or not isinstance(raw, (list, tuple, np.ndarray)) \
            or not 1 <= len(raw) <= MAX_LEAD_TIME + 1:
        raise SpecError(f"{name}: must be {rule}, got {_show(raw)}")
    out = []
    for i, x in enumerate(raw):
        if isinstance(x, (bool, np.bool_)) or not isinstance(x, (int, float, np.integer, np.floating)) \
                or not math.isfinite(float(x)) or not 0.0 <= float(x) <= 1.0:
            raise SpecError(f"{name}[{i}]: must be a probability in [0, 1], got {_show(x)}")
        out.append(float(x))
    total = math.fsum(out)
    if abs(total - 1.0) > SUM_TOLERANCE:
        raise SpecError(f"{name}: must be {rule}, got a sum of {total:.9g}")
    while out and out[-1] == 0.0:
        out.pop()  # trailing zeros say nothing; the longest lead time is the last positive entry
    return tuple(x / total for x in out)


def _check_hazards(law: LeadTimePmf) -> None:
    h = law.hazards()
    drops = np.flatnonzero(np.diff(h) < -HAZARD_TOLERANCE)
    if len(drops):
        k = int(drops[0])
        raise SpecError(
            f"instance.lead_time.pmf: with orders arriving in sequence (Kaplan's cut-off) the hazard "
            f"p_k / P(lead time >= k) must not fall as k grows, but it falls from {h[k]:.4g} at k={k} to "
            f"{h[k + 1]:.4g} at k={k + 1} (no gaps or dips inside the support); set crossing = true for "
            f"independent lead times")


def lead_time_demand(demand: "Demand", law: LeadTimePmf, extra: int = 1) -> "DiscretePmf":
    """Pmf of demand over L + `extra` periods with L drawn from `law` (independent of demand):
    the mixture sum_k p_k D^{*(k + extra)}; its dropped tail mass is the mixture of theirs."""
    from .demand import DiscretePmf

    parts = [(p, demand.lead_time_pmf(k + extra)) for k, p in enumerate(law.probs) if p > 0]
    n = max(len(pmf.probs) for _, pmf in parts)
    probs = np.zeros(n)
    for p, pmf in parts:
        probs[:len(pmf.probs)] += p * pmf.probs
    return DiscretePmf(probs, float(sum(p * pmf.truncation_mass for p, pmf in parts)))


def _show(v: Any) -> str:
    r = repr(v)
    return r if len(r) <= 60 else r[:57] + "..."
