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

from invbench.envs.dynamics import initial_state, step_fn
from invbench.envs.errors import BudgetError
from invbench.envs.spec import InstanceSpec, load_spec

from .iteration import TAU
from .policy import as_policy, legal_orders
from .state_index import StateCodec, StateIndex

DEFAULT_MAX_STATES = 2_000_000
_CHUNK = 200_000


@dataclass
class ExactEvaluation:
    cost: float
    lower: float
    upper: float
    holding: float
    shortage: float
    ordering: float
    states: int
    seconds: float
    criterion: str
    truncation_mass: float
    method: str = "exact"
    index: StateIndex | None = field(default=None, repr=False)
    P: sp.csr_matrix | None = field(default=None, repr=False)
    state_costs: np.ndarray | None = field(default=None, repr=False)  # [S, 3] holding, shortage, ordering
    orders: np.ndarray | None = field(default=None, repr=False)
    start: int = 0
    truncated_mass: float = 0.0  # long-run share of periods where the far-stock truncation acted
    truncated_at: int | None = None
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

    def to_dict(self) -> dict[str, Any]:
        return {"cost": self.cost, "lower": self.lower, "upper": self.upper, "holding": self.holding,
                "shortage": self.shortage, "ordering": self.ordering, "states": self.states,
                "seconds": self.seconds, "criterion": self.criterion,
                "truncation_mass": self.truncation_mass, "truncated_mass": self.truncated_mass,
                "truncated_at": self.truncated_at, "method": self.method}


def _stock_limit(spec: InstanceSpec) -> int:
    """Beyond this stock level a policy's reachable set is taken to be unbounded.

    Four times the width of the solver's first state-space guess plus the order cap: no
    sensible policy keeps stock (or backlog) that far out, and policies that drift there with
    positive probability (a constant order below mean demand lets stock creep up through runs
    of low demand) have an infinite reachable set that no finite chain holds.
    """
    from .state_space import initial_bounds
    b = initial_bounds(spec)
    return int(4 * (b.upper - b.lower + spec.order_cap_units) + 100)


class _Unbounded(BudgetError):
    pass


def explore(spec: InstanceSpec, policy: Any, start: np.ndarray | None = None,
            max_states: int = DEFAULT_MAX_STATES, truncate_at: int | None = None
            ) -> tuple[StateIndex, sp.csr_matrix, np.ndarray, np.ndarray, int]:
    """Reachable states of `policy`, their transition matrix, expected cost parts and orders.

    With `truncate_at` = X the chain is kept finite: no order is placed at stock >= X, and net
    inventory below -X is clipped to -X. The returned cost array then has a 4th column, the
    probability per state that this truncation changed what happens (its long-run average is
    the truncated mass).
    """
    pol = as_policy(policy)
    step = step_fn(spec)
    n = spec.state_dim
    codec = StateCodec(n, spec.order_cap_units)
    pmf = spec.demand.pmf().normalized()
    dvals = np.flatnonzero(pmf > 0)
    dprob = pmf[dvals]
    limit = _stock_limit(spec)
    s0 = initial_state(spec) if start is None else np.asarray(start, dtype=np.int64).reshape(1, n)
    known = codec.encode(s0)
    frontier = s0
    all_states, all_orders, all_costs = [], [], []
    from_keys, to_keys, probs = [], [], []
    total = 1
    while len(frontier):
        for lo in range(0, len(frontier), _CHUNK):
            block = frontier[lo:lo + _CHUNK]
            orders = legal_orders(spec, pol.act(block.astype(np.float32)))
            paused = np.zeros(len(block), dtype=bool)
            if truncate_at is not None:
                paused = (block[:, 0] >= truncate_at) & (orders > 0)
                orders = np.where(paused, 0, orders)
            rows = np.repeat(np.arange(len(block)), len(dvals))
            nxt, parts = step(block[rows], orders[rows], np.tile(dvals, len(block)))
            w = np.tile(dprob, len(block))
            cols = [np.bincount(rows, weights=w * p, minlength=len(block))
                    for p in (parts.holding, parts.shortage, parts.ordering)]
            if truncate_at is not None:
                clipped = nxt[:, 0] < -truncate_at
                nxt[:, 0] = np.maximum(nxt[:, 0], -truncate_at)
                cols.append(paused + np.bincount(rows, weights=w * clipped, minlength=len(block)))
            elif np.abs(nxt[:, 0]).max(initial=0) > limit:
                raise _Unbounded(f"exact evaluation: the policy can reach stock levels beyond +-{limit:,} "
                                 "with positive probability")
            cost = np.stack(cols, axis=1)
            all_states.append(block)
            all_orders.append(orders)
            all_costs.append(cost)
            from_keys.append(np.repeat(codec.encode(block), len(dvals)))
            to_keys.append(codec.encode(nxt))
            probs.append(w)
        cand = np.unique(to_keys_since(to_keys, frontier))
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
    orders = np.empty(len(index), dtype=np.int64)
    orders[perm] = np.concatenate(all_orders)
    rows = index.lookup_keys(np.concatenate(from_keys))
    cols = index.lookup_keys(np.concatenate(to_keys))
    P = sp.csr_matrix((np.concatenate(probs), (rows, cols)), shape=(len(index), len(index)))
    P.sum_duplicates()
    start_idx = int(index.lookup(s0)[0])
    return index, P, costs, orders, start_idx


def to_keys_since(to_keys: list[np.ndarray], frontier: np.ndarray) -> np.ndarray:
    """Keys of the next states produced while processing the current frontier."""
    n_blocks = -(-len(frontier) // _CHUNK)
    return np.concatenate(to_keys[-n_blocks:])


def _average(P: sp.csr_matrix, costs: np.ndarray, start: int, rel_tol: float, max_iter: int) -> tuple[np.ndarray, np.ndarray, bool]:
    c = np.column_stack([costs[:, :3].sum(axis=1), costs])
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


def _discounted(P: sp.csr_matrix, costs: np.ndarray, start: int, beta: float, rel_tol: float,
                max_iter: int) -> tuple[np.ndarray, np.ndarray, bool]:
    c = np.column_stack([costs[:, :3].sum(axis=1), costs])
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
                   max_truncated_mass: float = 1e-9) -> ExactEvaluation:
    """Exact long-run average (or discounted, from the start state) cost of `policy` on `spec`.

    A policy that can drift to very high stock (or backlog) with positive probability — a
    constant order lets stock creep up through runs of low demand — has an infinite reachable
    set. It is then evaluated on a chain truncated at a far stock level (`explore`), and the
    result is accepted only if the long-run probability that the truncation acts is at most
    `max_truncated_mass`; it is reported as `truncated_mass`.
    Raises BudgetError when the reachable state space is too large or the policy unstable.
    """
    spec = load_spec(spec)
    t0 = time.perf_counter()
    truncate_at = None
    try:
        index, P, costs, orders, s = explore(spec, policy, start, max_states)
    except _Unbounded:
        truncate_at = _stock_limit(spec)
        index, P, costs, orders, s = explore(spec, policy, start, max_states, truncate_at=truncate_at)
        max_iter = min(max_iter, 20_000)  # a drifting chain settles slowly; simulation is the better tool
    if spec.discount < 1:
        lo, hi, ok = _discounted(P, costs, s, spec.discount, rel_tol, max_iter)
        crit = "discounted"
    else:
        lo, hi, ok = _average(P, costs, s, rel_tol, max_iter)
        crit = "average"
    if not ok:
        raise BudgetError("exact evaluation: the bounds did not meet (the policy may have several "
                          "recurrent classes or mix very slowly) — use simulation")
    mid = 0.5 * (lo + hi)
    truncated = 0.0
    if truncate_at is not None:
        truncated = float(max(hi[4], 0.0)) if crit == "average" else float(max(hi[4], 0.0) * (1 - spec.discount))
        if truncated > max_truncated_mass:
            raise BudgetError(f"exact evaluation: the policy spends a long-run share {truncated:.1e} of periods "
                              f"beyond stock +-{truncate_at:,} (unstable, or far too much stock) — use simulation")
    return ExactEvaluation(float(mid[0]), float(lo[0]), float(hi[0]), float(mid[1]), float(mid[2]),
                           float(mid[3]), len(index), time.perf_counter() - t0, crit,
                           spec.demand.pmf().truncation_mass, index=index, P=P, state_costs=costs[:, :3],
                           orders=orders, start=s, truncated_mass=truncated, truncated_at=truncate_at)
