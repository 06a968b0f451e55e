"""The rollout agent's simulations as compiled loops: `sample_states` and `rollout_q` rows run
period after period inside one numba kernel, with the model's period rules
(`envs/models/<name>/rules.py`) and the current policy.

The kernel gives the numpy path's numbers (`rollout_agent.sample_states` / `rollout_q`, the
straightforward definition): the uniforms are drawn in the same order and shapes, the demands
are `Demand.from_uniforms` of them (once per path and period, before the loop), each
row's costs are added period by period as `Outcome.total` sums the parts, and the Q means are
taken by numpy on the same [N, K, M] totals (tests/test_rollout_kernels.py). The policy runs in
the kernel when it is
  * a linear order rule (`experiments/policy_kernels.py`: base-stock, (s, S), capped base-stock,
    ..., and the agent's own order-up-to start rule), or
  * a `LearnedPolicy`: the forward of `forward.row_index`, the very function the policy's `act`
    runs, and the order mapping of `Scaling.orders`; its decisions are memoised per state in a
    hash table (rollout rows revisit a few thousand states millions of times).
Anything else (a table, PIL, a plain callable), a model without compiled rules or an instance
they do not cover (`pack` gives None, e.g. a random lead time), and `compiled.enabled(False)`
or INVBENCH_ROLLOUT_NUMPY=1 leave the numpy path in charge: the functions here return None.
"""
from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from invbench.envs.models.compiled import covered, driver, jit, register, source_key
from invbench.envs.random_inputs import PeriodInputs
from invbench.experiments.policy_kernels import NEVER, LinearOrders, linear_orders

from . import forward

#: rows of the decision memo at the start (a power of two; it doubles when half full) and at most
MEMO, MEMO_MAX = 1 << 12, 1 << 20
#: environment switch forcing the numpy path (for comparisons)
NUMPY_ENV = "INVBENCH_ROLLOUT_NUMPY"
NO_FLOOR = -(1 << 62)  # the kernel's "no position floor" (Scaling.position_floor None)


_HASH: list[Any] = []


def memo_slot(x: Any, first: int, n: int, mask: int) -> int:  # pragma: no cover - compiled
    """Table slot of the state x[first .. first + n - 1]: FNV-1a over its entries, then the
    murmur3 finaliser (the entries are small integers: without it nearby states cluster)."""
    h = np.uint64(1469598103934665603)
    for i in range(n):
        h = (h ^ np.uint64(x[first + i] & 0xFFFFFFFF)) * np.uint64(1099511628211)
    h = (h ^ (h >> np.uint64(33))) * np.uint64(0xFF51AFD7ED558CCD)
    h = (h ^ (h >> np.uint64(33))) * np.uint64(0xC4CEB9FE1A85EC53)
    h = h ^ (h >> np.uint64(33))
    return np.int64(h & np.uint64(0xFFFFFFFF)) & mask


def _build(period: Callable[..., None], key: int) -> Any:
    from invbench.envs.models.nb_views import unmanaged
    row_index = forward.row_index
    # numba keys its disk cache by this file, not by forward.py: the forward's source hash is a
    # closure value, so an edited forward gets a fresh compile (as `key` does for the rules)
    fkey = source_key(forward.row_index)

    def run(state0, srow, first, has_first, D, ucol, keep0, every, kept, total, ip, fp, mode,
            W, level, reorder, cap, pack, ref, coef, seq, params, sizes, heads, scale, activation, buf,
            units, poscap, posfloor, case, memo0, memo_max, work, bs, ba, bn, bc, bf, hidx):  # pragma: no cover
        if key == 0 or fkey == 0:  # never true: they only key numba's disk cache (envs/models/compiled.py)
            return
        R = srow.shape[0]
        n = state0.shape[1]
        k = ba.shape[0]
        T = D.shape[1]
        nc = bc.shape[0]
        mt = memo0
        held = 0
        s, a, nx, costs, flows = unmanaged(bs), unmanaged(ba), unmanaged(bn), unmanaged(bc), unmanaged(bf)
        ipu, fpu, w_ = unmanaged(ip), unmanaged(fp), unmanaged(work)
        for r in range(R):
            for i in range(n):
                s[i] = state0[srow[r], i]
            tot = 0.0
            for t in range(T):
                if keep0 >= 0 and t >= keep0 and (t - keep0) % every == 0:
                    for i in range(n):
                        kept[(t - keep0) // every, r, i] = s[i]
                if t == 0 and has_first:
                    for j in range(k):
                        a[j] = first[r, j]
                elif mode == 0:  # the linear rule (as experiments/sim_kernels.py writes it)
                    for jj in range(k):
                        j = seq[jj]
                        f = 0
                        for i in range(n):
                            f += W[j, i] * s[i]
                        raw = level[j] - f
                        if ref[j] >= 0:
                            raw += coef[j] * a[ref[j]]
                        if f > reorder[j]:
                            raw = 0
                        o = min(max(raw, 0), cap[j])
                        a[j] = o if pack[j] == 1 else (o // pack[j]) * pack[j]
                else:  # the network, memoised per state (open addressing, linear probing)
                    # one table row per state: [used, state (n), orders (k)], one cache line
                    mask = mt.shape[0] - 1
                    slot = memo_slot(s, 0, n, mask)
                    found = False
                    while mt[slot, 0] == 1:
                        same = True
                        for i in range(n):
                            if mt[slot, 1 + i] != s[i]:
                                same = False
                                break
                        if same:
                            found = True
                            break
                        slot = (slot + 1) & mask
                    if found:
                        for j in range(k):
                            a[j] = mt[slot, 1 + n + j]
                    else:
                        row_index(s, params, sizes, heads, scale, activation, buf, hidx)
                        for j in range(k):
                            a[j] = units[j, hidx[j]]
                        if poscap > 0:  # Scaling.orders: one slot, the position cap
                            p = 0
                            for i in range(n):
                                p += s[i]
                            room = max(poscap - p, 0)
                            a[0] = min(a[0], (room // case) * case)
                        if posfloor > NO_FLOOR:  # Scaling.orders: one slot, the position floor
                            p = 0
                            for i in range(n):
                                p += s[i]
                            lift = -((p - posfloor) // case) * case
                            if lift > a[0]:
                                a[0] = min(lift, units[0, units.shape[1] - 1])
                        if held * 2 < mask:  # at most half full, so probes stay short
                            mt[slot, 0] = 1
                            held += 1
                            for i in range(n):
                                mt[slot, 1 + i] = s[i]
                            for j in range(k):
                                mt[slot, 1 + n + j] = a[j]
                            if held * 2 >= mask and mt.shape[0] < memo_max:  # grow: twice the rows
                                old = mt
                                mt = np.zeros((2 * old.shape[0], old.shape[1]), dtype=np.int64)
                                m2 = mt.shape[0] - 1
                                for e in range(old.shape[0]):
                                    if old[e, 0] == 1:
                                        sl = memo_slot(old[e], 1, n, m2)
                                        while mt[sl, 0] == 1:
                                            sl = (sl + 1) & m2
                                        for i in range(old.shape[1]):
                                            mt[sl, i] = old[e, i]
                d = D[ucol[r], t]
                period(s, a, d, ipu, fpu, nx, costs, flows, w_)
                c = 0.0
                for ci in range(nc):
                    c = c + costs[ci]
                tot += c
                for i in range(n):
                    s[i] = nx[i]
            total[r] = tot
    return jit(run)


@dataclass
class KernelPolicy:
    """What the kernel needs of the current policy: a linear rule (mode 0) or a network (1)."""

    mode: int
    linear: LinearOrders
    net: forward.NetArrays | None = None
    units: np.ndarray | None = None  # int64 [k, widest head]: units of each head's index
    poscap: int = 0
    posfloor: int = NO_FLOOR
    case: int = 1


class OrderUpTo:
    """Order up to `level` on the inventory position, at most `max_units`, in case packs (a
    policy with `act`, and a callable as the agent's start rule always was)."""

    def __init__(self, level: int, spec: Any, max_units: int) -> None:
        self.level, self.spec, self.max_units, self.q = int(level), spec, int(max_units), int(spec.case_pack)

    def act(self, states: np.ndarray) -> np.ndarray:
        want = np.clip(self.level - states.sum(axis=1), 0, self.max_units)
        return (want // self.q) * self.q

    __call__ = act

    def linear_orders(self, spec: Any) -> LinearOrders | None:
        """The rule as `experiments/policy_kernels.py` runs it (the simulator and the rollout kernel)."""
        if spec != self.spec or len(spec.order_slots) != 1:
            return None
        one = lambda v: np.asarray([v], dtype=np.int64)  # noqa: E731
        return LinearOrders(np.ones((1, spec.state_dim), dtype=np.int64), one(self.level), one(NEVER),
                            one(self.max_units), one(self.q), one(-1), one(0), one(0))


def _dummy_linear(k: int, n: int) -> LinearOrders:
    z = np.zeros(k, dtype=np.int64)
    return LinearOrders(np.zeros((k, n), dtype=np.int64), z, z, z, z + 1, z - 1, z, np.arange(k, dtype=np.int64))


def kernel_policy(act: Any, spec: Any) -> KernelPolicy | None:
    """The kernel's form of `act` (a policy, its bound `act`, or the order-up-to rule), or None."""
    from .learned_policy import LearnedPolicy
    owner = getattr(act, "__self__", act)
    n, k = spec.state_dim, len(spec.order_slots)
    if isinstance(owner, LearnedPolicy):
        if owner.spec != spec or type(owner).act is not LearnedPolicy.act:
            return None
        sc = owner.scaling
        widest = max(sc.slot_counts)
        units = np.zeros((sc.n_slots, widest), dtype=np.int64)
        for j in range(sc.n_slots):
            units[j, :sc.slot_counts[j]] = sc.slot_units(j)
        if sc.n_slots != k:
            return None
        floor = NO_FLOOR if sc.position_floor is None or sc.n_slots > 1 else int(sc.position_floor)
        return KernelPolicy(1, _dummy_linear(k, n), owner.arrays(), units,
                            int(sc.position_cap) if sc.n_slots == 1 else 0, floor, int(sc.case_pack))
    lin = linear_orders(owner, spec)
    return None if lin is None else KernelPolicy(0, lin)


def _ready(spec: Any, act: Any) -> tuple[Any, Any, KernelPolicy] | None:
    if os.environ.get(NUMPY_ENV, "") not in ("", "0") or PeriodInputs(spec).laws:
        return None
    found = covered(spec)
    pol = kernel_policy(act, spec) if found is not None else None
    if found is None or pol is None:
        return None
    rules, p = found
    if not _HASH:  # a call, not inlined: inlined, numba's pedantic SSA check warns about its loop
        from numba.extending import register_jitable
        register_jitable(memo_slot)
        _HASH.append(memo_slot)
    forward.register_row_index()
    return driver("rollout", rules, _build), p, pol


def _run(run: Any, p: Any, pol: KernelPolicy, spec: Any, state0: np.ndarray, srow: np.ndarray, first: np.ndarray,
         U: np.ndarray, ucol: np.ndarray, keep0: int, every: int, kept: np.ndarray) -> np.ndarray:
    rules = spec.model_def.rules
    n, k = spec.state_dim, len(spec.order_slots)
    lin, net = pol.linear, pol.net
    if net is None:
        net = forward.NetArrays(np.zeros(1), np.ones(2, dtype=np.int64), np.ones(k, dtype=np.int64),
                                np.ones(3, dtype=np.float32), 0)
    units = pol.units if pol.units is not None else np.zeros((k, 1), dtype=np.int64)
    total = np.zeros(len(srow))
    memo = MEMO if pol.mode == 1 else 2
    # demand by Demand.from_uniforms (the numpy path's own map), one row per path: a kernel row reads
    # its path's demands one after the other, and the K candidates of a path share them
    D = np.ascontiguousarray(spec.demand.from_uniforms(U).T)
    run(np.ascontiguousarray(state0, dtype=np.int64), srow, first, len(first) > 0, D, ucol, keep0, every, kept,
        total, p.ints, p.floats, pol.mode, lin.weights, lin.level, lin.reorder, lin.cap,
        lin.pack, lin.ref, lin.coef, lin.sequence, net.params, net.sizes, net.heads, net.scale, net.activation,
        net.scratch(), units, pol.poscap, pol.posfloor, pol.case,
        np.zeros((memo, 1 + n + k), dtype=np.int64), MEMO_MAX,
        np.empty(max(p.work, 1), dtype=np.int64), np.empty(n, dtype=np.int64), np.zeros(k, dtype=np.int64),
        np.empty(n, dtype=np.int64), np.empty(len(rules.costs)), np.empty(len(rules.flows), dtype=np.int64),
        np.zeros(k, dtype=np.int64))
    return total


def compiled_sample_states(spec: Any, act: Any, chains: int, warmup: int, spacing: int, per_chain: int,
                           start: np.ndarray, rng: np.random.Generator) -> np.ndarray | None:
    """The kept states [per_chain, chains, n] of `sample_states`, or None (numpy path)."""
    ready = _ready(spec, act)
    if ready is None:
        return None
    run, p, pol = ready
    periods = warmup + per_chain * spacing
    U = rng.random((periods, chains))  # = one rng.random(chains) per period, as Demand.sample draws
    kept = np.zeros((per_chain, chains, spec.state_dim), dtype=np.int64)
    idx = np.arange(chains, dtype=np.int64)
    _run(run, p, pol, spec, start, idx, np.zeros((0, len(spec.order_slots)), dtype=np.int64), U, idx, warmup,
         spacing, kept)
    return kept


def compiled_rollout_q(spec: Any, act: Any, states: np.ndarray, first: np.ndarray, K: int, M: int,
                       u: np.ndarray) -> np.ndarray | None:
    """Row totals [N * K * M] of `rollout_q` (rows state-major, then candidate, then path) for
    first orders `first` [N * K * M, k] and uniforms u [horizon + 1, N, 1, M]; None: numpy path."""
    ready = _ready(spec, act)
    if ready is None:
        return None
    run, p, pol = ready
    N = len(states)
    rows = np.arange(N * K * M, dtype=np.int64)
    srow = rows // (K * M)
    ucol = srow * M + rows % M
    U = np.ascontiguousarray(u.reshape(u.shape[0], N * M))
    kept = np.zeros((1, 1, 1), dtype=np.int64)
    return _run(run, p, pol, spec, states, srow, np.ascontiguousarray(first, dtype=np.int64), U, ucol, -1, 1, kept)
