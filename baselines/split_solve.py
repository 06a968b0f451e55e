"""Relative value iteration and discounted value iteration on a SplitMDP (no transition matrix).

The same iterations, bounds and tie rule as `iteration.py` (Odoni 1969 span bounds on the
aperiodicity-transformed chain for the average cost, MacQueen 1966 bounds when discounted), with
the Bellman sweep done by the compiled loops of `split_sweep.py`: two value arrays per state
live at a time. `exact.solve` takes this path when the caller asked for the quick path, the
method is one of these two, and the instance's exact space declares a demand split.
"""
from __future__ import annotations

import threading
import time
from typing import Any, Callable

import numpy as np
import numba
from numba import njit

from . import split_sweep as K
from .iteration import TAU, IterationOutcome
from .split_mdp import SplitMDP

#: Sweeps over more pairs than this share the units among numba's threads (NUMBA_NUM_THREADS);
#: smaller ones stay on one thread, where starting the threads would cost more than it saves.
THREADED_PAIRS = 2_000_000


def _sweep(mdp: SplitMDP) -> Callable:
    """The threaded sweep for large spaces, from the main thread only: numba's default thread
    pool must not be entered from two Python threads at once."""
    threads = (mdp.n_pairs > THREADED_PAIRS and numba.config.NUMBA_NUM_THREADS > 1
               and threading.current_thread() is threading.main_thread())
    return K.sweep_threads if threads else K.sweep


@njit(cache=True)
def _span(new, old, scale):
    """min and max of (new - old) / scale, as numpy computes them elementwise."""
    lo, hi = np.inf, -np.inf
    for i in range(len(new)):
        d = (new[i] - old[i]) / scale
        lo = min(lo, d)
        hi = max(hi, d)
    return lo, hi


def _finish(mdp: SplitMDP, sweep: Callable, h: np.ndarray, th: np.ndarray, alpha: float, beta: float,
            gamma: float) -> np.ndarray:
    """Global pair index of the greedy order per state (ties to the smallest order), given the
    minima th of the last sweep from h."""
    j = np.empty(mdp.n_states, dtype=np.int64)
    sweep(h, th, j, *mdp.sweep_args(), alpha, beta, gamma, True)
    return mdp.pair_start[:-1] + j


def relative_value_iteration(mdp: SplitMDP, rel_tol: float = 1e-6, max_iter: int = 100_000,
                             on_iter: Callable[[int, float, float], None] | None = None) -> IterationOutcome:
    t0 = time.perf_counter()
    h = np.zeros(mdp.n_states)
    th = np.empty(mdp.n_states)
    none = np.empty(0, dtype=np.int64)
    args = mdp.sweep_args()
    sweep = _sweep(mdp)
    ref = mdp.start
    lower, upper = -np.inf, np.inf
    it = 0
    converged = False
    while it < max_iter:
        it += 1
        sweep(h, th, none, *args, TAU, 1.0, 1.0 - TAU, False)
        lower, upper = _span(th, h, TAU)
        converged = upper - lower <= rel_tol * max(abs(lower), 1e-12)
        if converged or it == max_iter:
            break
        np.subtract(th, th[ref], out=h)
        if on_iter is not None:
            on_iter(it, lower, upper)
    # greedy w.r.t. the h of the last sweep: the policy whose cost the bounds enclose
    choice = _finish(mdp, sweep, h, th, TAU, 1.0, 1.0 - TAU)
    np.subtract(th, th[ref], out=h)
    if on_iter is not None:
        on_iter(it, lower, upper)
    return IterationOutcome(0.5 * (lower + upper), lower, upper, h, choice, it, time.perf_counter() - t0,
                            converged)


def discounted_value_iteration(mdp: SplitMDP, beta: float, rel_tol: float = 1e-6, max_iter: int = 1_000_000,
                               on_iter: Callable[[int, float, float], None] | None = None) -> IterationOutcome:
    t0 = time.perf_counter()
    v = np.zeros(mdp.n_states)
    tv = np.empty(mdp.n_states)
    none = np.empty(0, dtype=np.int64)
    args = mdp.sweep_args()
    sweep = _sweep(mdp)
    k = beta / (1.0 - beta)
    lo = hi = 0.0
    it = 0
    converged = False
    while it < max_iter:
        it += 1
        sweep(v, tv, none, *args, 1.0, beta, 0.0, False)
        dmin, dmax = _span(tv, v, 1.0)
        lo = float(tv[mdp.start] + k * dmin)
        hi = float(tv[mdp.start] + k * dmax)
        converged = hi - lo <= rel_tol * max(abs(lo), 1e-12)
        if converged or it == max_iter:
            break
        v, tv = tv, v
        if on_iter is not None:
            on_iter(it, lo, hi)
    choice = _finish(mdp, sweep, v, tv, 1.0, beta, 0.0)
    if on_iter is not None:
        on_iter(it, lo, hi)
    return IterationOutcome(0.5 * (lo + hi), lo, hi, tv, choice, it, time.perf_counter() - t0, converged)


def run_split(mdp: SplitMDP, discount: float, rel_tol: float, on_iter: Any) -> IterationOutcome:
    if discount < 1.0:
        return discounted_value_iteration(mdp, discount, rel_tol, on_iter=on_iter)
    return relative_value_iteration(mdp, rel_tol, on_iter=on_iter)
