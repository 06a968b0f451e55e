"""Exact evaluation of any stationary policy: its cost with no simulation noise.

The states the policy can reach from the start state are found breadth first, each stepped
against every demand value through the model's step function; the long-run average cost on
that finite chain then follows by value iteration with span bounds (the same certificate as the
solver's), and the stationary distribution by power iteration when asked for.
"""
from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.sparse as sp

from invbench.envs.checks import check_number
from invbench.envs.errors import BudgetError, SimulationOnly
from invbench.envs.inventory_env import check_start
from invbench.envs.random_inputs import period_outcomes
from invbench.envs.models.state_index import StateCodec, StateIndex
from invbench.envs.spec import InstanceSpec, load_spec

from .expectation import expected_step
from .iteration import TAU
from .policy import as_policy, checked_orders

DEFAULT_MAX_STATES = 2_000_000
_CHUNK = 200_000


@dataclass
class ExactEvaluation:
    cost: float
    lower: float
    upper: float
    parts: dict[str, float]  # expected cost per period by named part (holding, shortage, ...)
    states: int
    seconds: float
    criterion: str
    truncation_mass: float  # demand tail probability dropped from the pmf (as in SolveResult)
    method: str = "exact"
    index: StateIndex | None = field(default=None, repr=False)
    P: sp.csr_matrix | None = field(default=None, repr=False)
    state_costs: np.ndarray | None = field(default=None, repr=False)  # [S, parts] by named part
    orders: np.ndarray | None = field(default=None, repr=False)
    start: int = 0
    far_stock_share: float = 0.0  # long-run share of periods where the far-stock truncation acted
    far_stock_level: int | None = None
    clipped_orders: int = 0  # orders moved to a legal size (only when asked to clip)
    _pi: np.ndarray | None = field(default=None, repr=False)

    def stationary_distribution(self, tol: float = 1e-13, max_iter: int = 200_000) -> np.ndarray:
        """Long-run share of periods spent in each state (from the start state)."""
        if self._pi is None:
            pi = np.zeros(self.states)
            pi[self.start] = 1.0
            PT = self.P.T.tocsr()
            for _ in range(max_iter):
                new = TAU * (PT @ pi) + (1 - TAU) * pi
                if np.abs(new - pi).sum() < tol:
                    pi = new
                    break
                pi = new
            self._pi = pi / pi.sum()
        return self._pi

    def __getattr__(self, key: str) -> float:
        # cost parts read as attributes (ev.holding), whatever parts the model has
        parts = self.__dict__.get("parts") or {}
        if key in parts:
            return parts[key]
        raise AttributeError(key)

    def to_dict(self) -> dict[str, Any]:
        return {"cost": self.cost, "lower": self.lower, "upper": self.upper, **self.parts,
                "states": self.states, "seconds": self.seconds, "criterion": self.criterion,
                "truncation_mass": self.truncation_mass, "far_stock_share": self.far_stock_share,
                "far_stock_level": self.far_stock_level, "clipped_orders": self.clipped_orders,
                "method": self.method}


def _stock_limit(spec: InstanceSpec) -> int:
    """Beyond this stock level a policy's reachable set is taken to be unbounded.

    Four times the width of the solver's first state-space guess plus the order cap: no
    sensible policy keeps stock (or backlog) that far out, and policies that drift there with
    positive probability (a constant order below mean demand lets stock creep up through runs
    of low demand) have an infinite reachable set that no finite chain holds.
    """
    b = spec.model_def.exact_space(spec).initial_bounds()
    cap = sum(s.cap_units for s in spec.order_slots)
    return int(4 * (b.upper - b.lower + cap) + 100)


class _Unbounded(BudgetError):
    pass


@dataclass
class ReachableChain:
    """The reachable states of a policy, their transitions, expected cost parts and orders."""

    index: StateIndex
    P: sp.csr_matrix
    costs: np.ndarray  # [S, parts] (+1 column: truncation probability, when truncated)
    cost_names: tuple[str, ...]
    orders: np.ndarray  # [S, k]
    start: int
    clipped: int


#: Building a chain costs about this many sweeps over it (measured on the 2-core development
#: machine, a serial chain of 185,000 states and 10.6 M transitions: 4.2 s to build, 4.2 ns per
#: transition and sweep); `max_work` counts it so.
EXPLORE_SWEEPS = 100


def explore(spec: InstanceSpec, policy: Any, start: np.ndarray | None = None,
            max_states: int = DEFAULT_MAX_STATES, truncate_at: int | None = None,
            clip: bool = False, max_transitions: int | None = None) -> ReachableChain:
    """Reachable states of `policy` from `start`, breadth first, with the one expectation step.

    With `truncate_at` = X the chain is kept finite: no order is placed at stock >= X, and a
    signed stock level below -X is clipped to -X. The cost array then has one more column, the
    probability per state that this truncation changed what happens (its long-run average is
    the truncated mass).
    """
    pol = as_policy(policy)
    model = spec.model_def
    n = spec.state_dim
    radix_max = model.index_radix(spec)
    codec = StateCodec(n, radix_max)
    outcomes = period_outcomes(spec, spec.demand.pmf().normalized())  # demand x any other input
    limit = _stock_limit(spec)
    s0 = check_start(spec, start)
    known = codec.encode(s0)
    frontier = s0
    all_states, all_orders, all_costs = [], [], []
    from_keys, to_keys, probs = [], [], []
    names: tuple[str, ...] = ()
    clipped_total = 0
    total, transitions = 1, 0

    def step(s: np.ndarray, a: np.ndarray, d: np.ndarray, **inputs: np.ndarray):
        return model.step(spec, s, a, d, **inputs)

    def clip_far(nxt: np.ndarray) -> np.ndarray:
        if n > 1 and nxt[:, 1:].max(initial=0) > radix_max:
            # beyond what the state index holds (e.g. stock piling up at an upper stage)
            raise BudgetError(f"exact evaluation: the policy can reach a state entry beyond {radix_max:,} "
                              "(other than the first), more than the state index holds — use simulation")
        if truncate_at is None:
            if np.abs(nxt[:, 0]).max(initial=0) > limit:
                raise _Unbounded(f"exact evaluation: the policy can reach stock levels beyond +-{limit:,} "
                                 "with positive probability")
            return np.zeros(len(nxt), dtype=bool)
        below = nxt[:, 0] < -truncate_at
        nxt[:, 0] = np.maximum(nxt[:, 0], -truncate_at)
        return below

    while len(frontier):
        new_keys = []
        for lo in range(0, len(frontier), _CHUNK):
            block = frontier[lo:lo + _CHUNK]
            orders, nclip = checked_orders(spec, pol.act(block.astype(np.float32)), block, clip=clip)
            clipped_total += nclip
            paused = np.zeros(len(block), dtype=bool)
            if truncate_at is not None:
                paused = (block[:, 0] >= truncate_at) & (orders.sum(axis=1) > 0)
                orders = np.where(paused[:, None], 0, orders)
            ex = expected_step(step, block, orders, outcomes, clip_far, codec.encode)
            names = ex.cost_names
            cost = ex.costs
            if truncate_at is not None:
                cost = np.column_stack([cost, paused + ex.clip_mass])
            all_states.append(block)
            all_orders.append(orders)
            all_costs.append(cost)
            keys = codec.encode(block)
            from_keys.append(keys[ex.rows])
            to_keys.append(ex.cols)
            probs.append(ex.probs)
            new_keys.append(ex.cols)
            transitions += len(ex.probs)
            if max_transitions is not None and transitions > max_transitions:
                raise BudgetError(f"exact evaluation: the chain has more than {max_transitions:,} transitions "
                                  "(max_work) — use simulation")
        cand = np.unique(np.concatenate(new_keys))
        new = cand[~np.isin(cand, known, assume_unique=True)]
        total += len(new)
        if total > max_states:
            raise BudgetError(f"exact evaluation: the policy reaches more than {max_states:,} states "
                              "(raise max_states, or use simulation)")
        known = np.union1d(known, new)
        frontier = codec.decode(new)
    index = StateIndex(codec, np.concatenate(all_states))
    perm = index.lookup(np.concatenate(all_states))  # position of each stored row in the index
    costs = np.empty((len(index), all_costs[0].shape[1]))
    costs[perm] = np.concatenate(all_costs)
    orders = np.empty((len(index), len(spec.order_slots)), dtype=np.int64)
    orders[perm] = np.concatenate(all_orders)
    rows = index.lookup_keys(np.concatenate(from_keys))
    cols = index.lookup_keys(np.concatenate(to_keys))
    P = sp.csr_matrix((np.concatenate(probs), (rows, cols)), shape=(len(index), len(index)))
    P.sum_duplicates()
    return ReachableChain(index, P, costs, names, orders, int(index.lookup(s0)[0]), clipped_total)


def _average(P: sp.csr_matrix, costs: np.ndarray, n_parts: int, start: int, rel_tol: float, max_iter: int) -> tuple[np.ndarray, np.ndarray, bool]:
    c = np.column_stack([costs[:, :n_parts].sum(axis=1), costs])
    h = np.zeros_like(c)
    lo = hi = np.zeros(c.shape[1])
    for _ in range(max_iter):
        th = TAU * (c + P @ h) + (1 - TAU) * h
        d = (th - h) / TAU
        lo, hi = d.min(axis=0), d.max(axis=0)
        h = th - th[start]
        scale = max(abs(lo[0]), 1e-12)
        if np.all(hi - lo <= rel_tol * scale):
            return lo, hi, True
    return lo, hi, False


def _discounted(P: sp.csr_matrix, costs: np.ndarray, n_parts: int, start: int, beta: float, rel_tol: float,
                max_iter: int) -> tuple[np.ndarray, np.ndarray, bool]:
    c = np.column_stack([costs[:, :n_parts].sum(axis=1), costs])
    v = np.zeros_like(c)
    k = beta / (1 - beta)
    lo = hi = np.zeros(c.shape[1])
    for _ in range(max_iter):
        tv = c + beta * (P @ v)
        d = tv - v
        lo, hi = tv[start] + k * d.min(axis=0), tv[start] + k * d.max(axis=0)
        v = tv
        if np.all(hi - lo <= rel_tol * max(abs(lo[0]), 1e-12)):
            return lo, hi, True
    return lo, hi, False


def evaluate_exact(spec: Any, policy: Any, *, start: np.ndarray | None = None, rel_tol: float = 1e-9,
                   max_states: int = DEFAULT_MAX_STATES, max_iter: int = 200_000,
                   max_far_stock_share: float = 1e-9, clip: bool = False,
                   max_work: float | None = None) -> ExactEvaluation:
    """Exact long-run average (or discounted, from the start state) cost of `policy` on `spec`.

    A policy that can drift to very high stock (or backlog) with positive probability — a
    constant order lets stock creep up through runs of low demand — has an infinite reachable
    set. It is then evaluated on a chain truncated at a far stock level (`explore`), and the
    result is accepted only if the long-run probability that the truncation acts is at most
    `max_far_stock_share`; it is reported as `far_stock_share`. Orders that are not legal sizes
    are refused unless clip=True (then counted in `clipped_orders`). `max_work` bounds the
    evaluation's work in transition updates: one sweep over the stored transitions costs their
    number, building one costs `EXPLORE_SWEEPS` (None: only `max_states` and `max_iter` bound
    it); a caller with a time share to keep (a learning-curve point) falls back to simulation.
    Raises BudgetError when the reachable state space is too large or the policy unstable, and
    its subclass SimulationOnly when the instance has no exact face (lead times that may cross).
    """
    spec = load_spec(spec)
    rel_tol = check_number("rel_tol", rel_tol, 0.0, 1.0, lo_open=True, hi_open=True)
    max_states = int(check_number("max_states", max_states, 1, None, integer=True))
    if max_work is not None:
        max_work = check_number("max_work", max_work, 1, None)
    reason = spec.model_def.simulation_only(spec)
    if reason:
        raise SimulationOnly(f"exact evaluation: {reason}")
    t0 = time.perf_counter()
    truncate_at = None
    # building the chain may take at most half the work, leaving sweeps for the rest
    most = None if max_work is None else int(max_work // (2 * EXPLORE_SWEEPS))
    try:
        ch = explore(spec, policy, start, max_states, clip=clip, max_transitions=most)
    except _Unbounded:
        truncate_at = _stock_limit(spec)
        ch = explore(spec, policy, start, max_states, truncate_at=truncate_at, clip=clip, max_transitions=most)
        max_iter = min(max_iter, 20_000)  # a drifting chain settles slowly; simulation is the better tool
    capped = False
    if max_work is not None:
        nnz = max(ch.P.nnz, 1)
        sweeps = max(int((max_work - EXPLORE_SWEEPS * nnz) // nnz), 1)
        capped, max_iter = sweeps < max_iter, min(max_iter, sweeps)
    k = len(ch.cost_names)
    if spec.discount < 1:
        lo, hi, ok = _discounted(ch.P, ch.costs, k, ch.start, spec.discount, rel_tol, max_iter)
        crit = "discounted"
    else:
        lo, hi, ok = _average(ch.P, ch.costs, k, ch.start, rel_tol, max_iter)
        crit = "average"
    if not ok and capped:
        raise BudgetError(f"exact evaluation: not converged within {max_iter:,} sweeps of {len(ch.index):,} states "
                          f"(max_work {max_work:.3g} transition updates) — use simulation")
    if not ok:
        raise BudgetError("exact evaluation: the bounds did not meet (the policy may have several "
                          "recurrent classes or mix very slowly) — use simulation")
    mid = 0.5 * (lo + hi)
    truncated = 0.0
    if truncate_at is not None:
        t = float(max(hi[k + 1], 0.0))
        truncated = t if crit == "average" else t * (1 - spec.discount)
        if truncated > max_far_stock_share:
            raise BudgetError(f"exact evaluation: the policy spends a long-run share {truncated:.1e} of periods "
                              f"beyond stock +-{truncate_at:,} (unstable, or far too much stock) — use simulation")
    parts = {name: float(mid[1 + j]) for j, name in enumerate(ch.cost_names)}
    return ExactEvaluation(float(mid[0]), float(lo[0]), float(hi[0]), parts, len(ch.index),
                           time.perf_counter() - t0, crit, spec.demand.pmf().truncation_mass,
                           index=ch.index, P=ch.P, state_costs=ch.costs[:, :k], orders=ch.orders,
                           start=ch.start, far_stock_share=truncated, far_stock_level=truncate_at,
                           clipped_orders=ch.clipped)
