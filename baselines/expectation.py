"""The one expectation routine: step a batch of (state, action) rows against every value of the
period's random inputs with positive probability (demand, and any other input the model
declares, such as a lead-time cut-off) and weight the results by their probability.

It gives, per row, the expected value of each named cost part, the probability that the next
state had to be clipped back into a finite space, and the (row, next-state, probability)
triplets of the transition matrix. The MDP build and exact policy evaluation both use it.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import scipy.sparse as sp

from invbench.envs.random_inputs import JointOutcomes

#: (row, demand) combinations stepped per chunk: bounds the temporary memory.
CHUNK_ROWS = 4_000_000


@dataclass
class Expectation:
    cost_names: tuple[str, ...]
    costs: np.ndarray  # [rows, parts]
    clip_mass: np.ndarray  # [rows]
    rows: np.ndarray  # triplets: row index
    cols: np.ndarray  # triplets: next-state column (from `lookup`; -1 where absent)
    probs: np.ndarray  # triplets: probability
    P: sp.csr_matrix | None = None  # [rows, n_cols], when n_cols was given (triplets then empty)


def expected_step(step: Callable, states: np.ndarray, actions: np.ndarray, pmf: np.ndarray | JointOutcomes,
                  clip: Callable[[np.ndarray], np.ndarray] | None, lookup: Callable[[np.ndarray], np.ndarray],
                  on_next: Callable[[np.ndarray], None] | None = None, n_cols: int | None = None) -> Expectation:
    """Expectation over the random inputs of one period from each (state, action) row.

    pmf: the demand pmf (normalized), or the joint outcomes of all the period's random inputs
    (`envs.random_inputs.period_outcomes`), whose other inputs are passed to `step` by name.

    clip(next) keeps next states inside a finite space in place and returns where it acted;
    lookup(next) maps next states to column indices; on_next(next) sees every next state (the
    reachability search collects new states with it). With n_cols, each chunk is summed into a
    sparse block at once (many demand values lead to the same next state), which keeps the
    peak memory near that of the final matrix.
    """
    joint = pmf if isinstance(pmf, JointOutcomes) else JointOutcomes.of_demand(pmf)
    k = len(joint)
    n = len(states)
    chunk = max(1, CHUNK_ROWS // max(k, 1))
    names: tuple[str, ...] = ()
    costs = None
    clip_mass = np.zeros(n)
    rows_l, cols_l, probs_l = [], [], []
    blocks: list[sp.csr_matrix] = []
    for lo in range(0, n, chunk):
        hi = min(lo + chunk, n)
        rr = np.repeat(np.arange(lo, hi), k)
        dd, extra, w = joint.tiled(hi - lo)
        nxt, out = step(states[rr], actions[rr], dd, **extra)
        if costs is None:
            names = tuple(out.costs)
            costs = np.zeros((n, len(names)))
        if clip is not None:
            clipped = clip(nxt)
            if clipped.any():
                clip_mass[lo:hi] += np.bincount(rr[clipped] - lo, weights=w[clipped], minlength=hi - lo)
        if on_next is not None:
            on_next(nxt)
        for j, name in enumerate(names):
            costs[lo:hi, j] = np.bincount(rr - lo, weights=w * out.costs[name], minlength=hi - lo)
        cols = lookup(nxt)
        if n_cols is not None:
            if np.any(cols < 0):
                raise RuntimeError("exact solver: a transition left the state space (bounds inconsistent)")
            block = sp.csr_matrix((w, (rr - lo, cols)), shape=(hi - lo, n_cols))
            block.sum_duplicates()
            blocks.append(block)
            continue
        rows_l.append(rr)
        cols_l.append(cols)
        probs_l.append(w)
    if costs is None:
        costs = np.zeros((0, 0))
    cat = (lambda xs, dt: np.concatenate(xs) if xs else np.zeros(0, dtype=dt))
    P = None
    if n_cols is not None:
        P = sp.vstack(blocks, format="csr") if len(blocks) != 1 else blocks[0]
    return Expectation(names, costs, clip_mass, cat(rows_l, np.int64), cat(cols_l, np.int64),
                       cat(probs_l, float), P)
