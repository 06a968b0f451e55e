"""The MDP of a space that declares a demand split (`envs/models/demand_split.py`), held as
small tables instead of a transition matrix.

The deterministic part (avail, received, next pipeline) comes from the space's declared maps;
the demand part — the end stock for each (avail, demand) and the expected cost parts — is read
off the space's own step function on one representative row per avail value, and the ordering
cost per order likewise. Before the tables are used, `check_against_step` compares them with
the straightforward expectation (`expectation.expected_step`) on a sample of pairs: next-state
probabilities, clipped mass and every expected cost part. The object answers what the solver
and the result need of a FiniteMDP (states, index, pair counts, chosen orders, clipped mass,
reachable states) without ever forming one row per pair.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.sparse as sp

from invbench.envs.models.exact_space import Bounds, ExactSpace, SizeEstimate
from invbench.envs.models.demand_split import DemandSplit
from invbench.envs.models.state_index import StateIndex

from . import split_kernels as K
from .expectation import expected_step
from .mdp import IndexedStates

#: Pairs of the space checked against the straightforward expectation on every build.
CHECK_STATES = 400
#: The floor of a demand map that never cuts the end stock off (backorders).
NO_FLOOR = -(2**40)


class _PairView:
    """Read-only `mdp.<field>[pair indices]` for fields computed per pair on demand."""

    def __init__(self, mdp: "SplitMDP", fn: Any) -> None:
        self.mdp, self.fn = mdp, fn

    def __getitem__(self, pairs: Any) -> np.ndarray:
        p = np.asarray(pairs, dtype=np.int64)
        flat = p.ravel()
        s = np.searchsorted(self.mdp.pair_start, flat, side="right") - 1
        out = np.asarray(self.fn(s, flat - self.mdp.pair_start[s]))
        return out.reshape(p.shape + out.shape[1:])


@dataclass
class SplitMDP(IndexedStates):
    representation: str
    bounds: Bounds
    index: StateIndex
    actions: np.ndarray  # [J, k] every order, in the order `space.pairs` lists them
    totals: np.ndarray  # [J] units of each order
    blk: np.ndarray  # [blocks, 4] start, lo, hi, sum of the other entries
    cmb_start: np.ndarray
    cmb: np.ndarray  # [combos, 4] order, next block, received, avail offset
    vmin: int
    floor: int  # end stock = max(avail - demand, floor); NO_FLOOR where demand is never cut off
    p: np.ndarray  # demand pmf on 0 .. dmax (normalised)
    cost_names: tuple[str, ...]
    cd_parts: np.ndarray  # [avail values, parts] expected cost parts of the demand
    co_parts: np.ndarray  # [J, parts] cost parts of the order itself
    pair_start: np.ndarray  # [S + 1]
    start: int
    truncation_mass: float
    blk_rest: np.ndarray | None = None  # [blocks, n - 1] the other entries of each block
    free: np.ndarray | None = None  # [n - 1] entries that feed only what is received next period
    unit_start: np.ndarray | None = None  # [units + 1] runs of blocks sharing one expectation per order
    uo_start: np.ndarray | None = None  # [units + 1] rows of uo per unit, one per order
    uo: np.ndarray | None = None  # [rows, 4] next block, lowest and highest avail + received, lowest floor
    s_len: int = 0  # scratch size of the sweep

    def __post_init__(self) -> None:
        self.cd = np.ascontiguousarray(self.cd_parts.sum(axis=1))
        self.co = np.ascontiguousarray(self.co_parts.sum(axis=1))
        self.tail = np.r_[np.cumsum(self.p[::-1])[::-1], 0.0]  # tail[i] = P(demand >= i)
        self._units()
        self.pair_action = _PairView(self, lambda s, j: self.actions[j])
        self.at_upper = _PairView(self, lambda s, j: self.position(s) + self.totals[j] == self.bounds.upper)
        self.clip_mass = _PairView(self, self.clipped)

    # ------------------------------------------------------------------ what FiniteMDP offers
    @property
    def n_pairs(self) -> int:
        return int(self.pair_start[-1])

    def position(self, s: np.ndarray) -> np.ndarray:
        return self.index.states[s].sum(axis=1)

    def clipped(self, s: np.ndarray, j: np.ndarray) -> np.ndarray:
        return K.clip_mass(s, j, self.blk, self.cmb_start, self.cmb, self.bounds.lower, self.floor, self.p)

    def reachable(self, choice: np.ndarray) -> np.ndarray:
        """States reachable from the start when each state uses its pair in `choice`."""
        j = choice - self.pair_start[:-1]
        seen, queue = np.zeros(self.n_states, dtype=bool), np.empty(self.n_states, dtype=np.int64)
        return K.reachable(seen, queue, j, self.start, self.blk, self.cmb_start, self.cmb, self.bounds.lower,
                           self.floor, self.p)

    def _units(self) -> None:
        """Runs of blocks that share the expectation per order (`split_sweep.py`), and per
        (unit, order) its next block and the range of avail + received it needs."""
        b = self.bounds
        self.unit_start, orders = K.unit_starts(self.blk_rest, self.free, self.cmb_start)
        self.uo_start = np.r_[0, np.cumsum(orders)].astype(np.int64)
        self.uo = np.empty((self.uo_start[-1], 4), dtype=np.int64)
        self.s_len, bad = K.fill_unit_orders(self.uo, self.uo_start, self.unit_start, self.blk, self.cmb_start,
                                             self.cmb, self.totals, b.upper, b.lower, self.floor, len(self.p))
        if bad:
            raise RuntimeError("split solver: blocks of a unit lead to different next blocks")

    def sweep_args(self) -> tuple:
        """The tables the sweep reads, in the order of `split_sweep.sweep`."""
        return (self.s_len, self.unit_start, self.uo_start, self.uo, self.blk, self.cmb_start, self.cmb, self.totals,
                self.bounds.upper, self.bounds.lower, self.vmin, self.cd, self.co, self.floor, self.p, self.tail)


# ---------------------------------------------------------------------------- building
def _action_list(space: ExactSpace, index: StateIndex, b: Bounds) -> np.ndarray:
    """Every order the space allows, in its order: those of a state of least position."""
    low = int(np.argmin(index.states.sum(axis=1)))
    _, pa, _, _ = space.pairs(index.states[low:low + 1], b)
    return np.ascontiguousarray(pa, dtype=np.int64)


def _blocks(index: StateIndex) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(blk, rest entries per block, rest key per block) from the index's key layout."""
    two_off = 2 * index.codec.offset
    rest_key = index.keys // two_off
    first = np.flatnonzero(np.r_[True, rest_key[1:] != rest_key[:-1]])
    ends = np.r_[first[1:], len(rest_key)]
    x0 = index.states[:, 0]
    lo, hi = x0[first], x0[ends - 1]
    if np.any(hi - lo != ends - 1 - first):
        raise RuntimeError("split solver: stock levels of a block are not consecutive")
    rest = np.ascontiguousarray(index.states[first, 1:])
    blk = np.column_stack([first, lo, hi, rest.sum(axis=1)]).astype(np.int64)
    return blk, rest, np.ascontiguousarray(rest_key[first])


def _expected_costs(space: ExactSpace, states: np.ndarray, actions: np.ndarray,
                    pmf: np.ndarray) -> tuple[tuple[str, ...], np.ndarray]:
    """Expected cost parts of each (state, order) row, as the straightforward build has them."""
    ex = expected_step(space.step, states, actions, pmf, None, lambda nxt: np.zeros(len(nxt), dtype=np.int64))
    costs = space.pair_costs(states, np.arange(len(states)), actions, ex.costs)
    return ex.cost_names, costs


def _demand_map(space: ExactSpace, split: DemandSplit, vmin: int, vmax: int, action0: np.ndarray,
                pmf: np.ndarray) -> tuple[int, tuple[str, ...], np.ndarray]:
    """(floor, cost part names, expected cost parts per avail = vmin .. vmax), read off the step
    run on the state (avail, 0, ..., 0) with the empty order: the end stock must be
    max(avail - demand, floor) on every row, with one floor (or none)."""
    v = np.arange(vmin, vmax + 1, dtype=np.int64)
    rep = np.zeros((len(v), split.n), dtype=np.int64)
    rep[:, 0] = v
    acts = np.repeat(action0[None, :], len(v), axis=0)
    d = np.flatnonzero(pmf > 0)
    rr = np.repeat(np.arange(len(v)), len(d))
    dd = np.tile(d, len(v))
    nxt, _ = space.step(rep[rr], acts[rr], dd)
    plain = v[rr] - dd
    cut = nxt[:, 0] != plain
    floor = int(nxt[cut, 0].min()) if cut.any() else NO_FLOOR
    if not np.array_equal(nxt[:, 0], np.maximum(plain, floor)):
        raise RuntimeError("split solver: the step's end stock is not max(avail - demand, floor); "
                           "this space's demand split is not one the solver handles")
    names, cd = _expected_costs(space, rep, acts, pmf)
    return floor, names, cd


def build_split_mdp(space: ExactSpace, split: DemandSplit, b: Bounds) -> SplitMDP:
    """The tables of the space within bounds b; RuntimeError where they disagree with the step."""
    index = space.index(b)
    blk, rest, rest_key = _blocks(index)
    actions = _action_list(space, index, b)
    totals = actions.sum(axis=1)
    if totals[0] != 0 or np.any(np.diff(totals) < 0):
        raise RuntimeError("split solver: the space's orders are not listed by total, nothing first")
    n = split.n
    cmb_start = np.r_[0, np.cumsum(K.combo_counts(blk, totals, b.upper))].astype(np.int64)
    cmb = np.empty((cmb_start[-1], 4), dtype=np.int32)  # order, next block, received, avail offset
    vmin, vmax, missing = K.fill_combos(
        cmb, cmb_start, blk, rest, rest_key, actions, totals, np.ascontiguousarray(split.avail_from[1:]),
        np.ascontiguousarray(split.received_from[1:]), np.ascontiguousarray(split.rest_from[:, 1:]),
        index.codec.pipe_radix, b.upper)
    if missing:
        raise RuntimeError("exact solver: a transition left the state space (bounds inconsistent)")
    pmf = space.demand_pmf().normalized()
    floor, names, cd_parts = _demand_map(space, split, int(vmin), int(vmax), actions[0], pmf)
    if K.count_out_of_space(blk, cmb_start, cmb, totals, b.upper, b.lower, floor, pmf):
        raise RuntimeError("exact solver: a transition left the state space (bounds inconsistent)")
    # the order's own cost: a row with the order minus the row with the same avail and no order
    zero = np.zeros((len(actions), n), dtype=np.int64)
    _, with_order = _expected_costs(space, zero, actions, pmf)
    avail0, _, _ = split.apply(zero, actions)
    rep = zero.copy()
    rep[:, 0] = avail0
    _, without = _expected_costs(space, rep, np.repeat(actions[:1], len(actions), axis=0), pmf)
    co_parts = with_order - without
    pair_start = np.zeros(len(index) + 1, dtype=np.int64)
    K.pair_counts(pair_start, blk, totals, b.upper)
    np.cumsum(pair_start, out=pair_start)
    start = int(index.lookup(space.start_state())[0])
    # entries that feed neither the avail nor the next state's other entries: only what arrives
    free = np.all(split.rest_from[:, 1:n] == 0, axis=0) & (split.avail_from[1:n] == 0)
    mdp = SplitMDP(space.representation, b, index, actions, totals, blk, cmb_start, cmb, int(vmin), floor,
                   np.ascontiguousarray(pmf, dtype=float), names, cd_parts, co_parts, pair_start, start,
                   space.truncation_mass(), rest, free)
    check_against_step(space, split, mdp)
    return mdp


# ---------------------------------------------------------------------------- the check
def _sample_states(mdp: SplitMDP, n: int) -> np.ndarray:
    """Random states plus every block's lowest and highest stock of a few blocks and the start."""
    rng = np.random.default_rng(0)
    S = mdp.n_states
    pick = rng.integers(0, S, size=min(n, S))
    blocks = rng.integers(0, len(mdp.blk), size=min(n // 4 + 1, len(mdp.blk)))
    edges = np.r_[mdp.blk[blocks, 0], mdp.blk[blocks, 0] + mdp.blk[blocks, 2] - mdp.blk[blocks, 1]]
    return np.unique(np.r_[pick, edges, mdp.start, 0, S - 1])


def predicted_rows(mdp: SplitMDP, s: np.ndarray, j: np.ndarray) -> tuple[np.ndarray, sp.csr_matrix, np.ndarray]:
    """(expected cost parts, next-state probabilities, clipped mass) of pairs (s, j) by the tables."""
    b = np.searchsorted(mdp.blk[:, 0], s, side="right") - 1
    x0 = mdp.blk[b, 1] + s - mdp.blk[b, 0]
    c = mdp.cmb_start[b] + j
    zb, r, voff = mdp.cmb[c, 1], mdp.cmb[c, 2], mdp.cmb[c, 3]
    row = x0 + voff - mdp.vmin
    costs = mdp.cd_parts[row] + mdp.co_parts[j]
    d = np.flatnonzero(mdp.p > 0)
    rr = np.repeat(np.arange(len(s)), len(d))
    dd = np.tile(d, len(s))
    nxt0 = np.maximum(np.maximum(x0[rr] + voff[rr] - dd, mdp.floor) + r[rr], mdp.bounds.lower)
    cols = mdp.blk[zb[rr], 0] + nxt0 - mdp.blk[zb[rr], 1]
    P = sp.csr_matrix((mdp.p[dd], (rr, cols)), shape=(len(s), mdp.n_states))
    P.sum_duplicates()
    return costs, P, mdp.clipped(s, j)


def check_against_step(space: ExactSpace, split: DemandSplit, mdp: SplitMDP, n: int = CHECK_STATES,
                       states: np.ndarray | None = None) -> int:
    """Compare the tables with the straightforward expectation on the pairs of sampled states
    (or of `states`); RuntimeError naming what differs. Returns the number of pairs checked."""
    s = _sample_states(mdp, n) if states is None else np.asarray(states, dtype=np.int64)
    st = mdp.states[s]
    ps, pa, pstart, at_upper = space.pairs(st, mdp.bounds)
    if not np.array_equal(np.diff(pstart), np.diff(mdp.pair_start)[s]):
        raise RuntimeError("split solver: the legal orders differ from the space's pairs")
    j = np.arange(len(ps)) - pstart[ps]
    same_upper = np.array_equal(at_upper, mdp.at_upper[mdp.pair_start[s[ps]] + j])
    if not np.array_equal(pa, mdp.actions[j]) or not same_upper:
        raise RuntimeError("split solver: the orders differ from the space's pairs")
    pmf = space.demand_pmf().normalized()
    b = mdp.bounds
    ex = expected_step(space.step, st[ps], pa, pmf, lambda nxt: space.clip(nxt, b), mdp.index.lookup)
    if np.any(ex.cols < 0):
        raise RuntimeError("exact solver: a transition left the state space (bounds inconsistent)")
    costs = space.pair_costs(st, ps, pa, ex.costs)
    P = sp.csr_matrix((ex.probs, (ex.rows, ex.cols)), shape=(len(ps), mdp.n_states))
    P.sum_duplicates()
    c2, P2, clip2 = predicted_rows(mdp, s[ps], j)
    scale = max(1.0, float(np.abs(costs).max(initial=0.0)))
    if ex.cost_names != mdp.cost_names or not np.allclose(costs, c2, rtol=1e-9, atol=1e-9 * scale):
        raise RuntimeError("split solver: the declared split gives other expected costs than the step")
    if abs(P - P2).max() > 1e-12 or not np.allclose(ex.clip_mass, clip2, rtol=0, atol=1e-12):
        raise RuntimeError("split solver: the declared split gives other next states than the step")
    return len(ps)


# ---------------------------------------------------------------------------- the budget
#: Peak bytes per state of the split solve, as a base plus a share per state entry: the state
#: index (entries and keys, and their copies while it is built), the tables (a combo per state
#: or so), two value arrays, the pair offsets, the choice and the optimal table (measured with
#: tracemalloc and peak RSS: lost sales L = 5 and 6, 104 and 120 bytes per state while building
#: and about 135 at the end; backorders with the full pipeline, L = 4, 155;
#: experiments/perf/exact_targets.py, scaling.py).
SPLIT_BYTES_PER_STATE = 120
SPLIT_BYTES_PER_ENTRY = 8
#: Bytes per (state, order, demand) row of the check against the step (`expected_step` arrays).
CHECK_BYTES_PER_ROW = 160


def split_estimate(space: ExactSpace, b: Bounds) -> SizeEstimate:
    """States and pairs as the space counts them; memory of the matrix-free solve, plus the
    check of a sample of pairs against the step (one chunk of `expected_step` at most)."""
    from .expectation import CHUNK_ROWS
    est = space.estimate(b)
    n = space.dim
    per_state = SPLIT_BYTES_PER_STATE + SPLIT_BYTES_PER_ENTRY * n
    support = int(np.count_nonzero(space.demand_pmf().probs))
    sample_pairs = min(est.pairs, int(1.5 * CHECK_STATES * est.pairs / max(est.states, 1)) + 1)
    check = min(sample_pairs * support, CHUNK_ROWS) * CHECK_BYTES_PER_ROW
    return SizeEstimate(est.states, est.pairs, 0, est.states * per_state + check)
