"""Compiled runs of a model's period rules (`rules.py`): the batch step as one numba loop over rows.

numba is imported on first use only, so `import invbench` stays light. `period` and its helpers
are registered with `register_jitable`, which leaves them plain Python functions for the numpy
step and makes them callable from compiled code; the drivers here are built per rules and
cached on disk by numba. numba's cache is keyed by the driver's own file and bytecode, not by
the rules it calls, so each driver closes over `key`, a hash of the rules' source files: numba
hashes closure values into its cache key, and an edited rule gets a fresh compile instead of a
stale one.

`enabled(False)` (a context manager) turns every compiled path off, e.g. for tests comparing the
compiled paths with the numpy ones. A model without rules, or an instance its rules do not
cover (`Rules.pack` gives None), has no compiled path: callers then use the numpy step.
"""
from __future__ import annotations

import hashlib
import inspect
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Iterator

import numpy as np

from .base import Outcome
from .rules import Params, Rules

if TYPE_CHECKING:
    from invbench.envs.spec import InstanceSpec

_STATE = {"enabled": True}
_REGISTERED: set[Callable[..., Any]] = set()
_DRIVERS: dict[tuple[str, Callable[..., Any]], Any] = {}


@contextmanager
def enabled(on: bool) -> Iterator[None]:
    """Within the block, compiled paths are used (True, the default) or not (False)."""
    before = _STATE["enabled"]
    _STATE["enabled"] = bool(on)
    try:
        yield
    finally:
        _STATE["enabled"] = before


def is_enabled() -> bool:
    if not _STATE["enabled"]:
        return False
    try:
        import numba  # noqa: F401
    except ImportError:  # a dependency, but the numpy paths give the same numbers without it
        return False
    return True


def covered(spec: "InstanceSpec") -> tuple[Rules, Params] | None:
    """(rules, packed parameters) when compiled paths are on and the model's rules cover `spec`."""
    rules = spec.model_def.rules
    if rules is None or not is_enabled():
        return None
    p = rules.pack(spec)
    return None if p is None else (rules, p)


def register(*fns: Callable[..., Any]) -> None:
    """Make plain functions callable from compiled code (once each); they stay plain Python."""
    from numba.extending import register_jitable
    for f in fns:
        if f not in _REGISTERED:
            register_jitable(inline="always")(f)  # numba inlines it (see nb_views.py)
            _REGISTERED.add(f)


def source_key(*fns: Callable[..., Any]) -> int:
    """A 62-bit hash of the source files defining `fns` (keys the compiled drivers' disk cache)."""
    h = hashlib.sha256()
    for f in sorted({inspect.getsourcefile(fn) or "" for fn in fns}):
        h.update(Path(f).read_bytes() if f else b"")
    return (int.from_bytes(h.digest()[:8], "little") >> 2) | 1  # never 0 (the drivers test for 0)


def jit(fn: Callable[..., Any]) -> Any:
    """numba's njit, cached on disk where numba finds a writable cache folder."""
    import numba
    try:
        return numba.njit(cache=True)(fn)
    except RuntimeError:  # no writable cache location: compile per process
        return numba.njit(fn)


def driver(kind: str, rules: Rules, build: Callable[[Callable[..., Any], int], Any]) -> Any:
    """The compiled driver `build(period, key)` for these rules, built once per process."""
    from . import nb_views
    fn = rules.period
    if (kind, fn) not in _DRIVERS:
        register(*rules.helpers, fn)
        _DRIVERS[(kind, fn)] = build(fn, source_key(fn, *rules.helpers, nb_views.unmanaged))
    return _DRIVERS[(kind, fn)]


def _build_rows(period: Callable[..., None], key: int) -> Any:
    from .nb_views import unmanaged

    def rows(state, orders, demand, ip, fp, nxt, costs, flows, work, bs, ba, bn, bc, bf):  # pragma: no cover
        if key == 0:  # never true: `key` is here only to key numba's disk cache (module doc)
            return
        n, k = state.shape[1], orders.shape[1]
        s, a, nx, c, f = unmanaged(bs), unmanaged(ba), unmanaged(bn), unmanaged(bc), unmanaged(bf)
        ipu, fpu, w = unmanaged(ip), unmanaged(fp), unmanaged(work)
        for r in range(state.shape[0]):
            for i in range(n):
                s[i] = state[r, i]
            for i in range(k):
                a[i] = orders[r, i]
            period(s, a, demand[r], ipu, fpu, nx, c, f, w)
            for i in range(n):
                nxt[r, i] = nx[i]
            for i in range(len(c)):
                costs[i, r] = c[i]
            for i in range(len(f)):
                flows[i, r] = f[i]
    return jit(rows)


def _build_one(period: Callable[..., None], key: int) -> Any:
    from .nb_views import unmanaged

    def one(state, nxt, ints, floats, ip, fp, work, k):  # pragma: no cover - compiled
        # ints = [orders (k), demand, flows], floats = costs: few arguments, since numba's call
        # from Python costs about a tenth of a microsecond per array (the env steps one row)
        if key == 0:  # never true: `key` is here only to key numba's disk cache (module doc)
            return
        # views bound to names first: passed as call expressions, numba's inlining lost writes
        s, a, nx, c, f = unmanaged(state[0]), unmanaged(ints[:k]), unmanaged(nxt[0]), unmanaged(floats), \
            unmanaged(ints[k + 1:])
        ipu, fpu, w = unmanaged(ip), unmanaged(fp), unmanaged(work)
        period(s, a, ints[k], ipu, fpu, nx, c, f, w)
    return jit(one)


def one_row_driver(rules: Rules) -> Any:
    """`one(state[1, n], next[1, n], ints, floats, ip, fp, work, k)`: one period of one row, with
    ints = [orders (k), demand, flows out] and floats = costs out (the env's step)."""
    return driver("one", rules, _build_one)


class CompiledStep:
    """The model's batch step, compiled: `step(state[B, n], orders[B, k], demand[B])` gives the
    same (next state, Outcome) as `model.step`, bit for bit (tests/test_compiled_paths.py)."""

    def __init__(self, rules: Rules, p: Params, state_dim: int, slots: int) -> None:
        self.rules, self.params = rules, p
        self.rows = driver("rows", rules, _build_rows)
        self.work = np.empty(max(p.work, 1), dtype=np.int64)
        # one row's buffers for the driver (module nb_views: views into them skip reference counts)
        self.buffers = (np.empty(state_dim, dtype=np.int64), np.empty(slots, dtype=np.int64),
                        np.empty(state_dim, dtype=np.int64), np.empty(len(rules.costs)),
                        np.empty(len(rules.flows), dtype=np.int64))

    def __call__(self, state: np.ndarray, action: np.ndarray, demand: np.ndarray) -> tuple[np.ndarray, Outcome]:
        state = np.ascontiguousarray(state, dtype=np.int64)
        B = len(state)
        act = np.ascontiguousarray(np.asarray(action, dtype=np.int64).reshape(B, -1))
        d = np.ascontiguousarray(demand, dtype=np.int64).reshape(B)
        nxt = np.empty_like(state)
        costs = np.empty((len(self.rules.costs), B))
        flows = np.empty((len(self.rules.flows), B), dtype=np.int64)
        if state.shape[1] != len(self.buffers[0]) or act.shape[1] != len(self.buffers[1]):
            raise ValueError(f"state and orders must be [B, {len(self.buffers[0])}] and [B, {len(self.buffers[1])}]")
        self.rows(state, act, d, self.params.ints, self.params.floats, nxt, costs, flows, self.work, *self.buffers)
        return nxt, self.rules.outcome(costs, flows)


def compiled_step(spec: "InstanceSpec") -> CompiledStep | None:
    """The compiled batch step of `spec`'s model, or None when there is none (see module doc)."""
    found = covered(spec)
    return None if found is None else CompiledStep(*found, spec.state_dim, len(spec.order_slots))
