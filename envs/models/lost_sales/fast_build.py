"""Fast construction of the lost-sales MDP, using where demand enters the step.

Demand touches only the stock coordinate: with avail = stock available before demand, the step
maps (state, order, d) to (end(avail, d) + received, shifted pipeline). So the model's step
function is run (1) once per pair with zero demand, giving received stock, the shifted
pipeline and the ordering cost, and (2) once per (avail, d) on a tiny batch, giving the
end-stock distribution and expected holding/shortage per avail. Because stock is the least
significant digit of a state key, the next states of a pair are consecutive indices, and the
transition rows are written without any lookups. `tests/test_mdp_fast.py` checks the result
equals `mdp.build_mdp` (the straightforward path) on small instances.
"""
from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
import scipy.sparse as sp

from ..exact_space import Bounds

if TYPE_CHECKING:
    from invbench.baselines.mdp import FiniteMDP
    from .model import LostSalesSpace


def build_fast(space: "LostSalesSpace", bounds: Bounds) -> "FiniteMDP":
    from invbench.baselines.mdp import FiniteMDP

    spec = space.spec
    index = space.index(bounds)
    states = index.states
    pair_state, pair_action, pair_start, at_upper = space.pairs(states, bounds)
    pair_order = pair_action[:, 0]

    def step(s: np.ndarray, a: np.ndarray, d: np.ndarray):  # the model's one step function
        return space.model.step(spec, s, a, d)

    # (1) zero demand: received stock, shifted pipeline, ordering cost
    st = states[pair_state]
    nxt0, parts0 = step(st, pair_order, np.zeros(len(pair_state), dtype=np.int64))
    avail = parts0.end_level  # with zero demand nothing is sold, so end stock = avail
    base = nxt0
    base[:, 0] = parts0.received  # the next state when everything available is sold
    base_idx = index.lookup(base)
    if np.any(base_idx < 0):
        raise RuntimeError("fast build: a base next state is missing from the state space")

    # (2) tiny batch over (avail, demand): end-stock pmf and expected holding/shortage
    pmf_obj = spec.demand.pmf()
    pmf = pmf_obj.normalized()
    dvals = np.flatnonzero(pmf > 0)
    amax = int(avail.max(initial=0))
    a_grid = np.repeat(np.arange(amax + 1), len(dvals))
    d_grid = np.tile(dvals, amax + 1)
    w = np.tile(pmf[dvals], amax + 1)
    small = spec.with_(lead_time=0, unit_order_cost=0.0, fixed_order_cost=0.0)
    _, pd = space.model.step(small, a_grid[:, None], np.zeros_like(a_grid), d_grid)
    M = np.zeros((amax + 1, amax + 1))
    np.add.at(M, (a_grid, pd.end_level), w)
    hold = np.bincount(a_grid, weights=w * pd.holding, minlength=amax + 1)
    short = np.bincount(a_grid, weights=w * pd.shortage, minlength=amax + 1)

    # rows: entries e with M[avail, e] > 0, columns base_idx + e (consecutive stock levels)
    nz_rows, nz_cols = np.nonzero(M)  # sorted by row, then column
    nz_vals = M[nz_rows, nz_cols]
    counts = np.bincount(nz_rows, minlength=amax + 1)
    offs = np.concatenate([[0], np.cumsum(counts)])
    lengths = counts[avail]
    indptr = np.concatenate([[0], np.cumsum(lengths)]).astype(np.int64)
    # entry j of pair k sits at flat index offs[avail[k]] + j of the (avail, e) list; int32
    # index arithmetic halves the memory traffic of these multi-million-entry arrays
    rows = np.repeat(np.arange(len(pair_state), dtype=np.int32), lengths)
    shift = (offs[avail] - indptr[:-1]).astype(np.int32)
    flat = np.arange(indptr[-1], dtype=np.int32)
    flat += shift[rows]
    cols = base_idx.astype(np.int32)[rows]
    cols += nz_cols.astype(np.int32)[flat]
    data = nz_vals[flat]
    P = sp.csr_matrix((data, cols, indptr), shape=(len(pair_state), len(states)))

    cost_parts = np.column_stack([hold[avail], short[avail], parts0.ordering])
    start = int(index.lookup(space.start_state())[0])
    return FiniteMDP(space.representation, bounds, index, pair_state, pair_action, pair_start,
                     ("holding", "shortage", "ordering"), cost_parts, P, np.zeros(len(pair_state)),
                     at_upper, float(pmf_obj.truncation_mass), start)
