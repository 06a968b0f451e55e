"""The finite MDP of an instance, built from the model's step function.

Every (state, order) pair is stepped against every demand value with positive probability, in
chunks, and the results weighted by the pmf: that *is* the transition matrix and expected cost.
Arrays follow QuantEcon's DiscreteDP shape: state-action pairs sorted by state, a cost per pair
and a sparse pair x state transition matrix.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from invbench.envs.dynamics import step_fn
from invbench.envs.errors import BudgetError
from invbench.envs.spec import InstanceSpec

from .lead_time_cost import lead_time_cost
from .state_index import StateCodec, StateIndex
from .state_space import Bounds, backorder_full_states, count_lost_sales_states, lost_sales_states

#: Pairs stepped per chunk while building (bounds the temporary memory).
_CHUNK_ROWS = 4_000_000
#: Bytes per stored transition (float64 value + int32 column) plus per-pair overhead.
_BYTES_PER_NNZ = 12
_BYTES_PER_PAIR = 64
#: Peak bytes per stored transition while building and iterating (measured, experiments/perf/scaling.py).
_PEAK_BYTES_PER_NNZ = 56

REPRESENTATIONS = ("lost_sales", "backorder_position", "backorder_full")


@dataclass
class FiniteMDP:
    """Arrays of one finite MDP. Pairs are contiguous per state: pairs of state s are
    pair_start[s] .. pair_start[s+1]-1, in increasing order size."""

    representation: str
    bounds: Bounds
    index: StateIndex
    pair_state: np.ndarray
    pair_order: np.ndarray
    pair_start: np.ndarray
    cost_parts: np.ndarray  # [pairs, 3]: holding, shortage, ordering (expected, per period)
    P: sp.csr_matrix  # [pairs, states]
    clip_mass: np.ndarray  # [pairs] probability of leaving below the lower bound (clipped back)
    at_upper: np.ndarray  # [pairs] the order brings the position exactly to the upper bound
    truncation_mass: float
    start: int

    @property
    def states(self) -> np.ndarray:
        return self.index.states

    @property
    def n_states(self) -> int:
        return len(self.index)

    @property
    def n_pairs(self) -> int:
        return len(self.pair_state)

    @property
    def cost(self) -> np.ndarray:
        return self.cost_parts.sum(axis=1)

    @property
    def nbytes(self) -> int:
        return int(self.P.data.nbytes + self.P.indices.nbytes + self.P.indptr.nbytes
                   + self.cost_parts.nbytes + self.index.states.nbytes)


@dataclass(frozen=True)
class SizeEstimate:
    states: int
    pairs: int
    transitions: int
    bytes: int

    def to_dict(self) -> dict:
        return {"states": self.states, "pairs": self.pairs, "transitions": self.transitions, "bytes": self.bytes}

    def describe(self) -> str:
        return (f"{self.states:,} states, {self.pairs:,} state-order pairs, about "
                f"{self.bytes / 2**20:,.0f} MiB")


def _representation(spec: InstanceSpec, full_pipeline: bool) -> str:
    if spec.model == "lost_sales":
        return "lost_sales"
    return "backorder_full" if full_pipeline else "backorder_position"


def _states(rep: str, spec: InstanceSpec, bounds: Bounds) -> np.ndarray:
    if rep == "lost_sales":
        return lost_sales_states(spec.state_dim, bounds.upper)
    if rep == "backorder_position":
        return np.arange(bounds.lower, bounds.upper + 1, dtype=np.int64)[:, None]
    return backorder_full_states(spec.state_dim, bounds)


def estimate_size(spec: InstanceSpec, bounds: Bounds, full_pipeline: bool = False) -> SizeEstimate:
    """State, pair and transition counts and memory, computed before anything is built."""
    rep = _representation(spec, full_pipeline)
    q, cap = spec.case_pack, spec.order_cap_units
    support = int(np.count_nonzero(spec.demand.pmf().probs))
    if rep == "lost_sales":
        n = spec.state_dim
        B = bounds.upper
        states = count_lost_sales_states(n, B)
        # pairs with stock v: (pipeline, order) combinations with sum <= B - v, thinned by the
        # case pack; each has min(v, max demand) + 1 distinct next states.
        dmax = spec.demand.pmf().support_max
        per_v = [count_lost_sales_states(n, B - v) for v in range(B + 1)]
        pairs = sum(per_v) // q + states
        transitions = sum(c * (min(v, dmax) + 1) for v, c in enumerate(per_v)) // q + states
        # measured peak of the fast build: about 51-54 bytes per stored transition (L = 4, 5)
        return SizeEstimate(states, pairs, transitions, transitions * _PEAK_BYTES_PER_NNZ)
    if rep == "backorder_position":
        span = bounds.upper - bounds.lower + 1
        states = span
        pairs = sum(min(cap, bounds.upper - y) // q + 1 for y in range(bounds.lower, bounds.upper + 1))
        per_pair = support
    else:
        n = spec.state_dim
        span = bounds.upper - bounds.lower
        states = count_lost_sales_states(n, span)
        pairs = count_lost_sales_states(n + 1, span) // q + states
        per_pair = support
    transitions = pairs * per_pair
    return SizeEstimate(states, pairs, transitions, transitions * _BYTES_PER_NNZ + pairs * _BYTES_PER_PAIR)


def check_budget(est: SizeEstimate, max_states: int, max_bytes: int) -> None:
    if est.states > max_states or est.bytes > max_bytes:
        raise BudgetError(
            f"exact solve: needs {est.describe()}, over the budget of {max_states:,} states / "
            f"{max_bytes / 2**20:,.0f} MiB (raise max_states / max_memory_mb, or shrink the instance)")


def enumerate_pairs(spec: InstanceSpec, states: np.ndarray, bounds: Bounds) -> tuple[np.ndarray, ...]:
    """All (state, order) pairs keeping the position after ordering <= bounds.upper, state-major."""
    position = states.sum(axis=1)
    sizes = spec.order_sizes_units
    room = bounds.upper - position
    n_orders = np.maximum(np.searchsorted(sizes, room, side="right"), 1)  # ordering nothing is always allowed
    pair_start = np.concatenate([[0], np.cumsum(n_orders)]).astype(np.int64)
    pair_state = np.repeat(np.arange(len(states)), n_orders)
    pair_order = sizes[np.arange(pair_start[-1]) - pair_start[pair_state]]
    at_upper = (position[pair_state] + pair_order) == bounds.upper
    return pair_state, pair_order, pair_start, at_upper


def build_mdp(spec: InstanceSpec, bounds: Bounds, *, full_pipeline: bool = False) -> FiniteMDP:
    """Step every (state, order, demand) through the model and collect the weighted results."""
    rep = _representation(spec, full_pipeline)
    states = _states(rep, spec, bounds)
    n = states.shape[1]
    codec = StateCodec(n, max(spec.order_cap_units, bounds.upper - min(bounds.lower, 0)))
    index = StateIndex(codec, states)
    states = index.states
    position = states.sum(axis=1)

    pair_state, pair_order, pair_start, at_upper = enumerate_pairs(spec, states, bounds)

    pmf_obj = spec.demand.pmf()
    pmf = pmf_obj.normalized()
    dvals = np.flatnonzero(pmf > 0)
    dprob = pmf[dvals]

    if rep == "backorder_position":
        step = step_fn(spec.with_(lead_time=0))
    else:
        step = step_fn(spec)

    n_pairs = len(pair_state)
    cost_parts = np.zeros((n_pairs, 3))
    clip_mass = np.zeros(n_pairs)
    blocks = []
    chunk = max(1, _CHUNK_ROWS // len(dvals))
    for lo in range(0, n_pairs, chunk):
        hi = min(lo + chunk, n_pairs)
        ps = np.repeat(np.arange(lo, hi), len(dvals))
        dd = np.tile(dvals, hi - lo)
        w = np.tile(dprob, hi - lo)
        nxt, parts = step(states[pair_state[ps]], pair_order[ps], dd)
        if rep != "lost_sales":
            below = nxt[:, 0] < bounds.lower
            np.add.at(clip_mass, ps[below] , w[below]) if below.any() else None
            nxt[:, 0] = np.maximum(nxt[:, 0], bounds.lower)
        cols = index.lookup(nxt)
        if np.any(cols < 0):
            raise RuntimeError("exact solver: a transition left the state space (bounds inconsistent)")
        for j, part in enumerate((parts.holding, parts.shortage, parts.ordering)):
            cost_parts[lo:hi, j] = np.bincount(ps - lo, weights=w * part, minlength=hi - lo)
        block = sp.csr_matrix((w, (ps - lo, cols)), shape=(hi - lo, len(states)))
        block.sum_duplicates()
        blocks.append(block)
    P = sp.vstack(blocks, format="csr") if len(blocks) > 1 else blocks[0]

    if rep == "backorder_position":
        # Holding and backorder cost of the period in which the order arrives, G(y + a).
        g = lead_time_cost(spec, position[pair_state] + pair_order) * (spec.discount ** spec.lead_time)
        h_part = lead_time_cost(spec.with_(shortage_cost=0.0), position[pair_state] + pair_order)
        cost_parts[:, 0] = h_part * (spec.discount ** spec.lead_time)
        cost_parts[:, 1] = g - cost_parts[:, 0]
        truncation = spec.demand.lead_time_pmf(spec.lead_time + 1).truncation_mass
    else:
        truncation = pmf_obj.truncation_mass
    start = int(index.lookup(np.zeros((1, n), dtype=np.int64))[0])
    return FiniteMDP(rep, bounds, index, pair_state, pair_order, pair_start, cost_parts, P,
                     clip_mass, at_upper, float(max(truncation, pmf_obj.truncation_mass)), start)
