"""The exact solver's view of dual sourcing: net inventory >= a lower bound, inventory position
(net + everything in transit) <= an upper bound, both checked after the solve and widened.

Reduction (exact): units due in k periods are the same units whichever supplier sends them, so
the solver merges the two pipelines into one, "units arriving in k periods" for k = 1 .. lr-1;
with le <= 1 the expedited pipeline is empty anyway and the merge changes nothing. The
expedited order placed now joins slot le - 1 (with le = 0 it is in the net inventory at once).
"""
from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from invbench.envs.errors import SpecError
from invbench.envs.newsvendor import order_up_to_level

from ..demand_split import DemandSplit, fixed_lead_time
from ..exact_space import BYTES_PER_NNZ, BYTES_PER_PAIR, Bounds, ExactSpace, SizeEstimate
from ..state_index import StateCodec, StateIndex

if TYPE_CHECKING:
    from invbench.baselines.mdp import FiniteMDP


class DualSourcingSpace(ExactSpace):
    representation = "dual_sourcing_merged"

    # ---------------------------------------------------------------- layout of the merge
    @property
    def dim(self) -> int:
        return self.spec.lead_time  # net inventory + slots 1 .. lr-1

    def slot_caps(self) -> np.ndarray:
        """Largest content of each merged slot: one regular order, plus one expedited order in
        the slots an expedited order still passes through (1 .. le-1)."""
        lr, le = self.spec.lead_time, self.spec.expedited_lead_time
        cap_r, cap_e = (s.cap_units for s in self.model.order_slots(self.spec))
        return np.array([cap_r + (cap_e if j <= le - 1 else 0) for j in range(1, lr)], dtype=np.int64)

    def merge(self, full: np.ndarray) -> np.ndarray:
        lr, le = self.spec.lead_time, self.spec.expedited_lead_time
        out = np.array(full[:, :lr], dtype=np.int64, copy=True)
        if le >= 2:
            out[:, 1:le] += full[:, lr:]
        return out

    def expand(self, merged: np.ndarray) -> np.ndarray:
        extra = max(self.spec.expedited_lead_time - 1, 0)
        return np.column_stack([merged, np.zeros((len(merged), extra), dtype=np.int64)])

    # ---------------------------------------------------------------- bounds
    def initial_bounds(self) -> Bounds:
        """A starting point only, verified after solving and widened where it binds: the
        position up to the regular supplier's single-sourcing order-up-to level (the fractile of
        demand over lr + 1 periods; expediting only lowers what the slow pipeline must cover),
        and the net inventory down to one period of the largest demand below zero."""
        dmax = self.spec.demand.pmf().support_max
        return Bounds(upper=order_up_to_level(self.spec) + 1, lower=-dmax - 1)

    # ---------------------------------------------------------------- states and pairs
    def _pipes(self, span: int) -> np.ndarray:
        caps = np.minimum(self.slot_caps(), max(span, 0))
        if len(caps) == 0:
            return np.zeros((1, 0), dtype=np.int64)
        grid = np.indices(tuple(caps + 1)).reshape(len(caps), -1).T.astype(np.int64)
        return grid[grid.sum(axis=1) <= span]

    def states(self, b: Bounds) -> np.ndarray:
        pipes = self._pipes(b.upper - b.lower)
        reps = b.upper - b.lower - pipes.sum(axis=1) + 1
        idx = np.repeat(np.arange(len(pipes)), reps)
        net = b.lower + np.arange(reps.sum()) - np.repeat(np.cumsum(reps) - reps, reps)
        return np.column_stack([net, pipes[idx]])

    def codec(self, b: Bounds) -> StateCodec:
        caps = self.slot_caps()
        return StateCodec(self.dim, int(max(caps.max(initial=0), b.upper - min(b.lower, 0), 1)))

    def start_state(self) -> np.ndarray:
        return self.merge(self.model.start_state(self.spec))

    def _combos(self) -> np.ndarray:
        """All (regular, expedited) order pairs, by total and then regular first (so that a tie
        in the solver goes to the smaller order, and then to the cheaper supplier)."""
        sr, se = (s.sizes_units for s in self.model.order_slots(self.spec))
        a = np.array([(r, e) for r in sr for e in se], dtype=np.int64)
        return a[np.lexsort((a[:, 1], a.sum(axis=1)))]

    def pairs(self, states: np.ndarray, b: Bounds):
        """Every order pair keeping the position after ordering <= b.upper, state-major."""
        position = states.sum(axis=1)
        combos = self._combos()
        totals = combos.sum(axis=1)
        n_orders = np.maximum(np.searchsorted(totals, b.upper - position, side="right"), 1)
        pair_start = np.concatenate([[0], np.cumsum(n_orders)]).astype(np.int64)
        pair_state = np.repeat(np.arange(len(states)), n_orders)
        pair_action = combos[np.arange(pair_start[-1]) - pair_start[pair_state]]
        at_upper = position[pair_state] + pair_action.sum(axis=1) == b.upper
        return pair_state, pair_action, pair_start, at_upper

    # ---------------------------------------------------------------- dynamics on the space
    def step(self, states: np.ndarray, actions: np.ndarray, demand: np.ndarray):
        nxt, out = self.model.step(self.spec, self.expand(states), actions, demand)
        return self.merge(nxt), out

    def clip(self, nxt: np.ndarray, b: Bounds) -> np.ndarray:
        below = nxt[:, 0] < b.lower
        nxt[:, 0] = np.maximum(nxt[:, 0], b.lower)
        return below

    def demand_split(self) -> DemandSplit | None:
        """On the merged state demand meets the net inventory only: the expedited order adds to
        it at once when le = 0, the slot arriving next period is received, and each order joins
        the slot of its lead time less one (u = [net, slots 1 .. lr-1, regular, expedited])."""
        if fixed_lead_time(self.spec) is None:
            return None
        lr, le = self.spec.lead_time, self.spec.expedited_lead_time
        n = self.dim
        avail, recv = np.zeros(n + 2, dtype=np.int64), np.zeros(n + 2, dtype=np.int64)
        rest = np.zeros((n - 1, n + 2), dtype=np.int64)
        avail[0] = 1
        for col, ell in ((n, lr), (n + 1, le)):  # the regular and the expedited order
            if ell == 0:
                avail[col] = 1
            elif ell == 1:
                recv[col] = 1
            else:
                rest[ell - 2, col] = 1
        if n >= 2:
            recv[1] = 1
        for t in range(n - 2):
            rest[t, t + 2] = 1
        return DemandSplit(avail, recv, rest)

    # ---------------------------------------------------------------- budget and checks
    def estimate(self, b: Bounds) -> SizeEstimate:
        """Exact counts: pipelines by their sum (a convolution over the slots), then the net
        inventories that fit, then the order pairs that fit under the upper bound."""
        span = b.upper - b.lower
        f = np.ones(1)
        for c in self.slot_caps():
            f = np.convolve(f, np.ones(int(c) + 1))
        F = np.cumsum(f)
        y = np.arange(b.lower, b.upper + 1)
        per_position = F[np.minimum(y - b.lower, len(F) - 1)]  # states with position y
        totals = self._combos().sum(axis=1)
        G = np.cumsum(np.bincount(totals))
        pairs_per = G[np.minimum(b.upper - y, len(G) - 1)]
        states = int(per_position.sum()) if span >= 0 else 0
        pairs = int((per_position * pairs_per).sum())
        support = int(np.count_nonzero(self.demand_pmf().probs))
        transitions = pairs * support
        return SizeEstimate(states, pairs, transitions, transitions * BYTES_PER_NNZ + pairs * BYTES_PER_PAIR)

    def binding(self, mdp: "FiniteMDP", chosen: np.ndarray) -> tuple[bool, bool]:
        """Upper binds where an order brings the position onto the bound while either supplier
        could have sent one unit more; lower where probability was clipped up to the bound."""
        act = mdp.pair_action[chosen]
        caps = np.array([s.cap_units for s in self.model.order_slots(self.spec)])
        more = np.any(act + 1 <= caps[None, :], axis=1)
        up = bool(np.any(mdp.at_upper[chosen] & (act.sum(axis=1) > 0) & more))
        down = bool(np.any(mdp.clip_mass[chosen] > 1e-12))
        return up, down

    # ---------------------------------------------------------------- the optimal table
    def table_keys(self, obs: np.ndarray) -> np.ndarray:
        return self.merge(np.asarray(obs, dtype=np.int64))

    def table_orders(self, index: StateIndex, orders: np.ndarray, b: Bounds, obs: np.ndarray) -> np.ndarray:
        """Off the table: above the upper bound order nothing (the bound limits the optimal
        position after ordering); below the lower bound on net inventory, the orders of the
        state with net inventory at the bound, the shortfall added to the expedited order (up to
        its cap). The optimum never reaches either from the empty start."""
        keys = self.table_keys(obs)
        short = np.maximum(b.lower - keys[:, 0], 0)
        keys[:, 0] += short
        pos = index.lookup(keys)
        out = np.zeros((len(obs), orders.shape[1]), dtype=np.int64)
        found = pos >= 0
        out[found] = orders[pos[found]]
        cap_e = self.model.order_slots(self.spec)[1].cap_units
        out[:, 1] = np.minimum(out[:, 1] + np.where(found, short, 0), cap_e)
        above = keys.sum(axis=1) > b.upper
        out[above] = 0
        missing = ~found & ~above
        if np.any(missing):
            bad = obs[np.argmax(missing)]
            raise SpecError(f"state: {list(map(int, bad))} is outside the optimal table (in-transit "
                            f"entries above the order caps)")
        return out
