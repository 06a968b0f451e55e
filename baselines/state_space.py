"""Finite state spaces for the exact solver, and the bounds that keep the optimum inside them.

Lost sales: states with on-hand + pipeline <= B and orders keeping the inventory position
after ordering <= B. Backorders: the inventory position y in [lo, hi] (or, to test that
reduction, the full pipeline state with net inventory >= lo). Why these bounds are safe is in
`initial_bounds`; `exact.solve` checks after solving that no reachable optimal decision
touches them, and widens them when one does.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from invbench.envs.spec import InstanceSpec


@dataclass(frozen=True)
class Bounds:
    """upper: largest inventory position after ordering; lower: smallest stock level (backorders)."""

    upper: int
    lower: int = 0

    def widened(self, spec: InstanceSpec, up: bool, down: bool) -> "Bounds":
        step = max(2, spec.case_pack, int(math.ceil(0.25 * max(self.upper - self.lower, 4))))
        return Bounds(self.upper + (step if up else 0), self.lower - (step if down else 0))


def _fractile_level(spec: InstanceSpec) -> int:
    """Critical-fractile order-up-to level on demand over L + 1 periods (backorder base-stock)."""
    h, p = spec.holding_cost, spec.shortage_cost
    ratio = p / (p + h) if p + h > 0 else 0.5
    cdf = spec.demand.lead_time_pmf(spec.lead_time + 1).cdf()
    return int(np.searchsorted(cdf, ratio - 1e-12))


def _eoq_room(spec: InstanceSpec) -> int:
    """Extra room for batch ordering when a fixed cost makes large orders pay (EOQ scale)."""
    if spec.fixed_order_cost <= 0:
        return 0
    h = max(spec.holding_cost, 1e-9)
    return int(math.ceil(math.sqrt(2.0 * spec.fixed_order_cost * spec.demand.mean / h)))


def initial_bounds(spec: InstanceSpec) -> Bounds:
    """First guess of the state-space bounds.

    Lost sales: the optimal inventory position after ordering does not exceed the order-up-to
    level of the backorder system with the same costs (Morton 1969; Zipkin 2008, from memory) —
    lost sales never needs more protection than backorders. A fixed order cost adds EOQ-scale
    room, a case pack one pack. Backorders: the optimal order-up-to level lies within EOQ-scale
    room above the minimiser of the one-period lead-time cost, and the reorder level within that
    room below it; one period of maximal demand below that is as low as the position can fall.
    These are starting points only: `exact.solve` verifies them after solving.
    """
    q = spec.case_pack
    base = _fractile_level(spec)
    room = _eoq_room(spec)
    if spec.model == "lost_sales":
        return Bounds(upper=max(base + room + q, q))
    dmax = spec.demand.pmf().support_max
    upper = base + 2 * room + q + 1
    lower = base - 2 * room - dmax - q - 1
    return Bounds(upper=upper, lower=min(lower, -1))


def lost_sales_states(n: int, upper: int) -> np.ndarray:
    """All x in Z_+^n with sum(x) <= upper, as an int64 array [S, n]."""
    states = np.zeros((1, 0), dtype=np.int64)
    sums = np.zeros(1, dtype=np.int64)
    for _ in range(n):
        room = upper - sums
        reps = room + 1
        idx = np.repeat(np.arange(len(states)), reps)
        vals = np.arange(reps.sum()) - np.repeat(np.cumsum(reps) - reps, reps)
        states = np.column_stack([states[idx], vals])
        sums = sums[idx] + vals
    return states


def count_lost_sales_states(n: int, upper: int) -> int:
    return math.comb(upper + n, n)


def backorder_full_states(n: int, bounds: Bounds) -> np.ndarray:
    """Net inventory x0 >= lower, pipeline >= 0, inventory position <= upper."""
    span = bounds.upper - bounds.lower
    pipes = lost_sales_states(n - 1, span) if n > 1 else np.zeros((1, 0), dtype=np.int64)
    psum = pipes.sum(axis=1)
    reps = span - psum + 1
    idx = np.repeat(np.arange(len(pipes)), reps)
    x0 = bounds.lower + np.arange(reps.sum()) - np.repeat(np.cumsum(reps) - reps, reps)
    return np.column_stack([x0, pipes[idx]])
