"""Zheng & Federgruen (1991), "Finding optimal (s, S) policies is about as simple as evaluating
a single policy" (Operations Research 39(4)): the optimal (s, S) for periodic review with
backorders, a fixed order cost K and one-period cost G(y) of the position y after ordering.

c(s, S) = (K + sum_{j=0}^{S-s-1} m(j) G(S-j)) / M(S-s), with m the renewal mass function of
one-period demand and M its partial sums: a cycle starts at S and ends when the position first
falls to s or below.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from invbench.envs.models.backorder.lead_time_cost import lead_time_cost
from invbench.envs.errors import BudgetError
from invbench.envs.newsvendor import lead_time_demand_pmf
from invbench.envs.spec import InstanceSpec

from ._common import critical_ratio, fractile

#: How far the search may walk from the minimiser of G before we call it a runaway.
_MAX_SPAN = 1_000_000


class _LazyG:
    """G(y) = expected holding + shortage in the period the order arrives, on a growing grid."""

    def __init__(self, spec: InstanceSpec, centre: int, half: int) -> None:
        self.spec = spec
        self.lo, self.hi = centre - half, centre + half
        self.vals = lead_time_cost(spec, np.arange(self.lo, self.hi + 1))

    def _cover(self, a: int, b: int) -> None:
        if a < self.lo - _MAX_SPAN or b > self.hi + _MAX_SPAN:
            raise BudgetError("zheng_federgruen: the search ran more than 10^6 units from the start")
        while a < self.lo or b > self.hi:
            width = self.hi - self.lo + 1
            lo, hi = (self.lo - width, self.hi) if a < self.lo else (self.lo, self.hi + width)
            new = np.arange(lo, hi + 1)
            vals = np.empty(len(new))
            old = slice(self.lo - lo, self.hi - lo + 1)
            vals[old] = self.vals
            mask = np.ones(len(new), dtype=bool)
            mask[old] = False
            vals[mask] = lead_time_cost(self.spec, new[mask])
            self.lo, self.hi, self.vals = lo, hi, vals

    def __call__(self, y: int) -> float:
        self._cover(y, y)
        return float(self.vals[y - self.lo])

    def down_from(self, S: int, n: int) -> np.ndarray:
        """G(S), G(S-1), ..., G(S-n+1)."""
        self._cover(S - n + 1, S)
        return self.vals[S - self.lo - np.arange(n)]


class _Renewal:
    """m(j): expected number of periods the position spends j units below its start."""

    def __init__(self, p: np.ndarray) -> None:
        if p[0] >= 1.0:
            raise BudgetError("zheng_federgruen: demand is zero with probability one")
        self.p = p
        self.m = np.array([1.0 / (1.0 - p[0])])

    def masses(self, n: int) -> np.ndarray:
        while len(self.m) < n:
            j = len(self.m)
            k = min(j, len(self.p) - 1)
            # m(j) = sum_{l=1..j} p_l m(j-l) / (1 - p_0)
            val = float(np.dot(self.p[1:k + 1], self.m[j - 1::-1][:k])) / (1.0 - self.p[0])
            self.m = np.append(self.m, val)
        return self.m[:n]


@dataclass(frozen=True)
class ZFResult:
    s: int
    S: int
    cost: float  # holding + shortage + fixed ordering cost per period (no unit cost)


def zheng_federgruen(spec: InstanceSpec) -> ZFResult:
    """Optimal (s, S) for the backorder model (order up to S when the position is <= s)."""
    K = spec.fixed_order_cost
    ystar = fractile(lead_time_demand_pmf(spec).cdf(), critical_ratio(spec))
    dmax = spec.demand.pmf().support_max
    G = _LazyG(spec, ystar, 4 * dmax + 8)
    # G is convex; step off the fractile to the exact minimiser.
    while G(ystar - 1) < G(ystar):
        ystar -= 1
    while G(ystar + 1) < G(ystar):
        ystar += 1
    if K <= 0:
        return ZFResult(ystar - 1, ystar, G(ystar))
    ren = _Renewal(spec.demand.pmf().normalized())

    def c(s: int, S: int) -> float:
        n = S - s
        m = ren.masses(n)
        return (K + float(np.dot(m, G.down_from(S, n)))) / float(m.sum())

    # Step 0: the best reorder level for S = y*.
    S0 = ystar
    s = ystar - 1
    while c(s, S0) > G(s):
        s -= 1
    c0 = c(s, S0)
    # Step 1: raise S while G(S) <= c0; re-fit s whenever a better S appears.
    S = S0 + 1
    while G(S) <= c0:
        if c(s, S) < c0:
            S0 = S
            while c(s, S0) <= G(s + 1):
                s += 1
            c0 = c(s, S0)
        S += 1
    return ZFResult(s, S0, c0)
