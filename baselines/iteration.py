"""Iterative solvers on a FiniteMDP: relative value iteration (average cost) with span bounds,
value iteration and policy iteration (discounted).

Average cost: RVI on the aperiodicity-transformed chain (tau * P + (1 - tau) * I, tau * c),
which has the same optimal policies and a cost scaled by tau (Puterman 1994, sec. 8.5.4). The
bounds min(Th - h) <= g* <= max(Th - h) (Odoni 1969) certify the optimum; iteration stops once
their gap is below rel_tol relative to the cost.
"""
from __future__ import annotations

import time
from dataclasses import dataclass
from typing import Callable

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .mdp import FiniteMDP

TAU = 0.95


@dataclass
class IterationOutcome:
    value: float  # g (average) or v(start) (discounted), midpoint of the bounds
    lower: float
    upper: float
    h: np.ndarray  # relative values (average) or values (discounted) per state
    choice: np.ndarray  # chosen pair index per state
    iterations: int
    seconds: float
    converged: bool


def _segment_argmin(q: np.ndarray, start: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Min and argmin (as a global pair index) of q over each state's contiguous pairs.

    Ties go to the smallest order, so the optimal policy table is well defined.
    """
    mins = np.minimum.reduceat(q, start[:-1])
    owner = np.repeat(np.arange(len(start) - 1), np.diff(start))
    is_min = q <= mins[owner] + 1e-12 * np.maximum(1.0, np.abs(mins[owner]))
    cand = np.where(is_min, np.arange(len(q)), len(q))
    choice = np.minimum.reduceat(cand, start[:-1])
    return mins, choice


def relative_value_iteration(mdp: FiniteMDP, rel_tol: float = 1e-6, max_iter: int = 100_000,
                             h0: np.ndarray | None = None,
                             on_iter: Callable[[int, float, float], None] | None = None) -> IterationOutcome:
    t0 = time.perf_counter()
    c = mdp.cost
    h = np.zeros(mdp.n_states) if h0 is None else h0.copy()
    ref = mdp.start
    own = h[mdp.pair_state]
    lower = -np.inf
    upper = np.inf
    it = 0
    converged = False
    starts = mdp.pair_start[:-1]
    q = c
    while it < max_iter:
        it += 1
        q = TAU * (c + mdp.P @ h) + (1.0 - TAU) * own
        th = np.minimum.reduceat(q, starts)  # the argmin is only needed once, at the end
        diff = (th - h) / TAU
        lower, upper = float(diff.min()), float(diff.max())
        h = th - th[ref]
        own = h[mdp.pair_state]
        if on_iter is not None:
            on_iter(it, lower, upper)
        if upper - lower <= rel_tol * max(abs(lower), 1e-12):
            converged = True
            break
    # greedy w.r.t. the last h: the policy whose cost the bounds enclose (Odoni 1969)
    _, choice = _segment_argmin(q, mdp.pair_start)
    return IterationOutcome(0.5 * (lower + upper), lower, upper, h, choice, it,
                            time.perf_counter() - t0, converged)


def discounted_value_iteration(mdp: FiniteMDP, beta: float, rel_tol: float = 1e-6, max_iter: int = 1_000_000,
                               on_iter: Callable[[int, float, float], None] | None = None) -> IterationOutcome:
    """Value iteration with MacQueen (1966) bounds on the value of the start state."""
    t0 = time.perf_counter()
    c = mdp.cost
    v = np.zeros(mdp.n_states)
    it = 0
    converged = False
    lo = hi = 0.0
    starts = mdp.pair_start[:-1]
    q = c
    while it < max_iter:
        it += 1
        q = c + beta * (mdp.P @ v)
        tv = np.minimum.reduceat(q, starts)
        d = tv - v
        k = beta / (1.0 - beta)
        lo = float(tv[mdp.start] + k * d.min())
        hi = float(tv[mdp.start] + k * d.max())
        v = tv
        if on_iter is not None:
            on_iter(it, lo, hi)
        if hi - lo <= rel_tol * max(abs(lo), 1e-12):
            converged = True
            break
    _, choice = _segment_argmin(q, mdp.pair_start)
    return IterationOutcome(0.5 * (lo + hi), lo, hi, v, choice, it, time.perf_counter() - t0, converged)


def discounted_policy_iteration(mdp: FiniteMDP, beta: float, max_iter: int = 1000) -> IterationOutcome:
    """Howard's policy iteration: exact linear solves, stops when the policy repeats."""
    t0 = time.perf_counter()
    c = mdp.cost
    choice = mdp.pair_start[:-1].copy()  # start with "order nothing"
    eye = sp.identity(mdp.n_states, format="csc")
    v = np.zeros(mdp.n_states)
    it = 0
    for it in range(1, max_iter + 1):
        P_pi = mdp.P[choice]
        v = spla.spsolve((eye - beta * P_pi).tocsc(), c[choice])
        _, new = _segment_argmin(c + beta * (mdp.P @ v), mdp.pair_start)
        q_new = c[new] + beta * (mdp.P[new] @ v)
        q_old = c[choice] + beta * (mdp.P[choice] @ v)
        keep = q_old <= q_new + 1e-12 * np.maximum(1.0, np.abs(q_old))
        new = np.where(keep, choice, new)
        if np.array_equal(new, choice):
            break
        choice = new
    val = float(v[mdp.start])
    return IterationOutcome(val, val, val, v, choice, it, time.perf_counter() - t0, True)
