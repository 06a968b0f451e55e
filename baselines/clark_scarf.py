"""The exact optimum of the serial chain by the Clark-Scarf decomposition, the exact long-run cost
of any echelon base-stock policy, and the Shang & Song (2003) newsvendor bounds and heuristic.

The recursion is that of Chen & Zheng (1994) and Gallego & Zipkin (1999), written from memory
for this model's timing and costs (see `envs/models/serial/model.py`). Costs are rewritten on
echelons: with installation holding costs h_1 >= ... >= h_N and h_{N+1} = 0, the echelon rate is
e_j = h_j - h_{j+1}, and a period's cost is sum_j e_j X_j + (b + h_1) B, where X_j is stage j's
echelon net inventory (stock at stages 1..j plus stock in transit between them, minus
backorders) and B the backorders. This charges stock in transit to stage j at h_{j+1}, the rate
of the stage that shipped it, and nothing for stock in transit from the outside supplier.

If stage j's echelon inventory position after ordering is y in period t, then X_j in period
t + L_j is y - D(L_j + 1), and stage j-1's position in period t + L_j is min(s_{j-1}, y - D(L_j))
(D(n): demand over n periods). Hence, with C_1(y) = e_1 (y - (L_1 + 1) mu) + (b + h_1) E[(D(L_1 + 1) - y)^+]
and C_j(y) = e_j (y - (L_j + 1) mu) + E[C_{j-1}(min(s_{j-1}, y - D(L_j)))], the long-run cost
of the echelon base-stock levels s is C_N(s_N), and the optimal levels minimise C_1, C_2, ... in
turn. All C_j are linear with slope -(b + h_{j+1}) below 0 (for levels >= 0), and the optimal
s_j lies below the largest value of D(L_1 + ... + L_j + 1), so a finite grid is exact.
"""
from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np

from invbench.envs.errors import SpecError
from invbench.envs.newsvendor import fractile
from invbench.envs.spec import InstanceSpec, load_spec


@dataclass
class EchelonCost:
    """Echelon base-stock levels (stage 1 first) and their exact long-run cost per period."""

    levels: tuple[int, ...]
    cost: float
    parts: dict[str, float]
    backorders: float  # expected backorders at stage 1 at the end of a period

    def to_dict(self) -> dict[str, Any]:
        return {"levels": list(self.levels), "cost": self.cost, **self.parts, "backorders": self.backorders}


def _check(spec: InstanceSpec) -> None:
    if not {"lead_times", "holding_costs"} <= set(spec.model_def.fields):
        raise SpecError(f"instance.model: the Clark-Scarf decomposition is for the serial model, got {spec.model!r}")


def one_period_pmf(spec: InstanceSpec) -> np.ndarray:
    """The pmf every exact computation of the project uses (truncated, rescaled to sum to one)."""
    return spec.demand.pmf().normalized()


def convolution_power(p: np.ndarray, n: int) -> np.ndarray:
    """Pmf of the sum of n independent copies, without truncation (so it matches the MDP)."""
    out = np.array([1.0])
    for _ in range(n):
        out = np.convolve(out, p)
    return out


def _grid_top(spec: InstanceSpec, levels: Sequence[int] = ()) -> int:
    dmax = len(one_period_pmf(spec)) - 1
    return (sum(spec.lead_times) + 1) * dmax + 1 + max([0, *levels])


def _expect_shifted(values: np.ndarray, slope: float, q: np.ndarray) -> np.ndarray:
    """E[f(y - K)] for y = 0 .. len(values) - 1, K ~ q, f given on 0.. and linear with `slope` below 0."""
    m = len(q) - 1
    below = values[0] + slope * np.arange(-m, 0)
    ext = np.concatenate([below, values])
    return np.convolve(ext, q)[m:m + len(values)]


def _clamp(values: np.ndarray, level: int) -> np.ndarray:
    """f(min(level, y)) on the grid."""
    out = values.copy()
    out[level + 1:] = values[level]
    return out


def _recursion(spec: InstanceSpec, levels: Sequence[int] | None, top: int) -> tuple[list[int], float, float]:
    """Runs the recursion on 0 .. top; with levels None, the optimal levels (smallest
    minimisers). Returns (levels, cost, expected backorders)."""
    L, h, b = spec.lead_times, spec.holding_costs, spec.shortage_cost
    N = len(L)
    p = one_period_pmf(spec)
    mu = float(np.dot(np.arange(len(p)), p))
    e = [h[j] - (h[j + 1] if j + 1 < N else 0.0) for j in range(N)]
    y = np.arange(top + 1, dtype=float)
    q = convolution_power(p, L[0] + 1)
    k = np.arange(len(q))
    # E[(D - y)^+] on the grid: mean minus E[min(D, y)]
    tail = np.array([np.dot(q, np.maximum(k - v, 0)) for v in range(top + 1)])
    C = e[0] * (y - (L[0] + 1) * mu) + (b + h[0]) * tail
    B = tail.copy()  # expected backorders, carried through the same recursion
    chosen: list[int] = []
    for j in range(N):
        if j > 0:
            q = convolution_power(p, L[j])
            C = e[j] * (y - (L[j] + 1) * mu) + _expect_shifted(C, -(b + h[j]), q)
            B = _expect_shifted(B, -1.0, q)
        s = int(np.argmin(C)) if levels is None else int(levels[j])
        if j < N - 1:
            C, B = _clamp(C, s), _clamp(B, s)
        chosen.append(s)
    s_N = chosen[-1]
    return chosen, float(C[s_N]), float(B[s_N])


def _result(spec: InstanceSpec, levels: list[int], cost: float, backorders: float) -> EchelonCost:
    p = one_period_pmf(spec)
    mu = float(np.dot(np.arange(len(p)), p))
    L, h = spec.lead_times, spec.holding_costs
    # Little's law: every unit spends exactly L_j ends of periods in transit to stage j
    transit = mu * sum(h[j + 1] * L[j] for j in range(len(L) - 1))
    shortage = spec.shortage_cost * backorders
    parts = {"holding": cost - shortage - transit, "in_transit": transit, "shortage": shortage}
    return EchelonCost(tuple(levels), cost, parts, backorders)


def echelon_cost(spec: Any, levels: Sequence[int]) -> EchelonCost:
    """Exact long-run average cost of the echelon base-stock levels (stage 1 first), valid when
    `formula_applies` (the order caps never bind on the policy's long-run path)."""
    spec = load_spec(spec)
    _check(spec)
    levels = [int(s) for s in levels]
    if len(levels) != len(spec.lead_times) or min(levels) < 0:
        raise SpecError(f"levels: must be {len(spec.lead_times)} integers >= 0 (one per stage), got {levels}")
    chosen, cost, bo = _recursion(spec, levels, _grid_top(spec, levels))
    return _result(spec, chosen, cost, bo)


def effective_levels(levels: Sequence[int]) -> list[int]:
    """Levels that act the same: stage j's echelon position never exceeds what the chain above
    lets through, which is at most min(s_j+1, .., s_N); so s_j above that is lowered to it."""
    out = [int(s) for s in levels]
    for j in range(len(out) - 2, -1, -1):
        out[j] = min(out[j], out[j + 1])
    return out


def optimal_levels(spec: Any) -> EchelonCost:
    """The optimal echelon base-stock levels (as `effective_levels`, so rising upstream) and
    the optimal long-run average cost."""
    spec = load_spec(spec)
    _check(spec)
    chosen, cost, bo = _recursion(spec, None, _grid_top(spec))
    return _result(spec, effective_levels(chosen), cost, bo)


def largest_orders(spec: InstanceSpec, levels: Sequence[int]) -> list[int]:
    """Largest shipment each stage can receive under the echelon base-stock levels once the
    chain has filled up: the last demand plus what the stage above could not ship before (at
    most the gap between the effective level and the lowest echelon position the chain above
    lets the stage reach). An order cap at least this large never changes a shipment."""
    dmax = len(one_period_pmf(spec)) - 1
    L = spec.lead_times
    N = len(L)
    levels = effective_levels(levels)
    low = [0] * N
    low[N - 1] = levels[N - 1]
    for j in range(N - 2, -1, -1):
        low[j] = min(levels[j], low[j + 1] - L[j + 1] * dmax)
    return [levels[j] - low[j] + dmax for j in range(N)]


def formula_applies(spec: InstanceSpec, levels: Sequence[int]) -> bool:
    """Whether no order cap can bind on the long-run path of these levels (then the formula is
    the policy's exact cost; otherwise the caps change what the policy does)."""
    caps = spec.model_def.caps(spec)  # type: ignore[attr-defined]
    return all(c >= need for c, need in zip(caps, largest_orders(spec, levels)))


def newsvendor_bounds(spec: Any) -> tuple[list[int], list[int]]:
    """Shang & Song (2003) bounds on the optimal echelon levels, stage 1 first (from memory):
    stage j's level lies between the critical-fractile levels of demand over L_1 + .. + L_j + 1
    periods for the ratios (b + h_{j+1}) / (b + h_1) (lower) and (b + h_{j+1}) / (b + h_j)
    (upper): the chain with every holding cost raised to h_1, or with those below j lowered to
    h_j, is a single stage."""
    spec = load_spec(spec)
    _check(spec)
    L, h, b = spec.lead_times, spec.holding_costs, spec.shortage_cost
    N = len(L)
    p = one_period_pmf(spec)
    lo, hi = [], []
    for j in range(N):
        cdf = np.cumsum(convolution_power(p, sum(L[:j + 1]) + 1))
        above = h[j + 1] if j + 1 < N else 0.0
        lo.append(fractile(cdf, (b + above) / (b + h[0])))
        hi.append(fractile(cdf, (b + above) / (b + h[j])))
    return lo, hi


def shang_song_levels(spec: Any) -> list[int]:
    """The Shang & Song (2003) heuristic: the average of the two bounds, rounded half up."""
    lo, hi = newsvendor_bounds(spec)
    return [int(np.floor((a + c) / 2 + 0.5)) for a, c in zip(lo, hi)]


@dataclass
class SerialSolve:
    """What `solve_serial` found, before it is wrapped as the solver's result."""

    optimum: EchelonCost
    seconds: float
    notes: list[str] = field(default_factory=list)


def solve_serial(spec: Any, progress: bool = False) -> Any:
    """The certified optimum of a serial instance as the exact solver's `SolveResult`: the
    decomposition's cost (exact, so lower = upper) and the optimal echelon base-stock policy."""
    from invbench.envs.models.exact_space import Bounds

    from .exact import SolveResult
    from .policies.echelon import EchelonBaseStockPolicy
    from .policies._common import Optimum

    spec = load_spec(spec)
    t0 = time.perf_counter()
    opt = optimal_levels(spec)
    notes = ["Clark-Scarf decomposition (echelon base-stock levels by the Chen-Zheng recursion)"]
    if not formula_applies(spec, opt.levels):
        raise SpecError(f"instance.max_orders: the optimal echelon levels {list(opt.levels)} need orders up to "
                        f"{largest_orders(spec, opt.levels)} units; with smaller caps the decomposition is "
                        "not exact (raise max_orders, or solve the full MDP with method=\"rvi\" on a tiny instance)")
    policy = EchelonBaseStockPolicy(spec, list(opt.levels))
    policy.optimum = Optimum(method="analytic", cost=opt.cost, parts=dict(opt.parts),
                             note="optimal echelon base-stock levels (Clark-Scarf)")
    top = _grid_top(spec)
    return SolveResult(opt.cost, opt.cost, opt.cost, policy, len(spec.lead_times), time.perf_counter() - t0,
                       top + 1, 0, float(spec.demand.pmf().truncation_mass), "clark_scarf", "average",
                       "echelon", Bounds(upper=int(opt.levels[-1]), lower=0), 0, True, notes)
