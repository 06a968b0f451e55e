"""The serial chain as the generic exact solver sees it: the full state (every stage's stock and
pipeline), for brute-force checks of the Clark-Scarf decomposition on tiny instances.

States: stage 1's net inventory >= lower, every other entry >= 0, the total (the echelon
inventory position of stage N) <= upper. Orders: stage N keeps the total after ordering <= upper;
a stage below orders at most what the stage above can ship this period (ordering more ships the
same, so nothing optimal is lost). `certified_solve` is the exact method `solve()` uses first.
"""
from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

import numpy as np

from invbench.envs.newsvendor import fractile

from ..exact_space import (BYTES_PER_NNZ, BYTES_PER_PAIR, Bounds, ExactSpace, SizeEstimate,
                           count_simplex_states, simplex_states)
from ..state_index import StateCodec
from .model import blocks

if TYPE_CHECKING:
    from invbench.baselines.mdp import FiniteMDP

#: exact enumeration of the pair count below this many states; a product bound above it
_COUNT_EXACTLY = 3_000_000


class SerialSpace(ExactSpace):
    representation = "serial_full"

    # ---------------------------------------------------------------- bounds
    def initial_bounds(self) -> Bounds:
        """Upper: the newsvendor upper bound on stage N's optimal echelon level (ratio
        b / (b + h_N) of demand over all lead times + 1; Shang & Song 2003, from memory) plus
        one. Lower: one unit below what the whole chain's lead-time demand can take from zero.
        Verified after solving and widened when they bind."""
        spec = self.spec
        pmf = spec.demand.pmf().normalized()
        total = sum(spec.lead_times) + 1
        conv = np.array([1.0])
        for _ in range(total):
            conv = np.convolve(conv, pmf)
        b, hN = spec.shortage_cost, spec.holding_costs[-1]
        upper = fractile(np.cumsum(conv), b / (b + hN)) + 1
        dmax = len(pmf) - 1
        return Bounds(upper=max(upper, 1), lower=-(total * dmax) - 1)

    def widen(self, b: Bounds, up: bool, down: bool) -> Bounds:
        step = max(2, int(math.ceil(0.25 * max(b.upper - b.lower, 4))))
        return Bounds(b.upper + (step if up else 0), b.lower - (step if down else 0))

    # ---------------------------------------------------------------- states and pairs
    def states(self, b: Bounds) -> np.ndarray:
        n, span = self.dim, b.upper - b.lower
        rest = simplex_states(n - 1, span)
        reps = span - rest.sum(axis=1) + 1
        idx = np.repeat(np.arange(len(rest)), reps)
        x0 = b.lower + np.arange(reps.sum()) - np.repeat(np.cumsum(reps) - reps, reps)
        return np.column_stack([x0, rest[idx]])

    def codec(self, b: Bounds) -> StateCodec:
        caps = self.model.caps(self.spec)
        return StateCodec(self.dim, max(max(caps), b.upper - min(b.lower, 0)))

    def _ranges(self, states: np.ndarray, b: Bounds) -> np.ndarray:
        """Largest order per state and stage [S, N] (orders 0 .. that are enumerated)."""
        L = self.spec.lead_times
        caps = self.model.caps(self.spec)
        cols = blocks(self.spec)
        N = len(L)
        r = np.zeros((len(states), N), dtype=np.int64)
        r[:, N - 1] = np.minimum(caps[N - 1], b.upper - states.sum(axis=1))
        for j in range(N - 2, -1, -1):
            avail = states[:, cols[j + 1][0]] + (r[:, j + 1] if L[j + 1] == 0 else 0)
            r[:, j] = np.minimum(caps[j], avail)
        return np.maximum(r, 0)

    def pairs(self, states: np.ndarray, b: Bounds) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        radix = self._ranges(states, b) + 1
        counts = radix.prod(axis=1)
        pair_start = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
        pair_state = np.repeat(np.arange(len(states)), counts)
        local = np.arange(pair_start[-1]) - pair_start[pair_state]
        act = np.empty((len(pair_state), radix.shape[1]), dtype=np.int64)
        for j in range(radix.shape[1]):
            rj = radix[pair_state, j]
            act[:, j] = local % rj
            local //= rj
        at_upper = states[pair_state].sum(axis=1) + act[:, -1] == b.upper
        return pair_state, act, pair_start, at_upper

    def clip(self, nxt: np.ndarray, b: Bounds) -> np.ndarray:
        below = nxt[:, 0] < b.lower
        nxt[:, 0] = np.maximum(nxt[:, 0], b.lower)
        return below

    # ---------------------------------------------------------------- budget and checks
    def estimate(self, b: Bounds) -> SizeEstimate:
        span = b.upper - b.lower
        states = count_simplex_states(self.dim, span)
        if states <= _COUNT_EXACTLY:
            pairs = int((self._ranges(self.states(b), b) + 1).prod(axis=1).sum())
        else:
            pairs = states * int(np.prod([min(c, span) + 1 for c in self.model.caps(self.spec)]))
        support = int(np.count_nonzero(self.demand_pmf().probs))
        transitions = pairs * support
        return SizeEstimate(states, pairs, transitions, transitions * BYTES_PER_NNZ + pairs * BYTES_PER_PAIR)

    def binding(self, mdp: "FiniteMDP", chosen: np.ndarray) -> tuple[bool, bool]:
        top = mdp.pair_action[chosen, -1]
        cap = self.model.caps(self.spec)[-1]
        up = bool(np.any(mdp.at_upper[chosen] & (top > 0) & (top < cap)))
        down = bool(np.any(mdp.clip_mass[chosen] > 1e-12))
        return up, down

    # ---------------------------------------------------------------- the decomposition
    def certified_solve(self, **kw: Any) -> Any:
        """The exact optimum by the Clark-Scarf decomposition (`baselines/clark_scarf.py`)."""
        from invbench.baselines.clark_scarf import solve_serial
        return solve_serial(self.spec, **kw)
