"""A model's period rules as one pure function over state coordinates, run two ways.

Each model writes its rules once as `period(s, a, d, ip, fp, nxt, costs, flows, work)`:
`s[i]` is state coordinate i, `a[j]` order slot j, `d` the demand, `ip`/`fp` the instance's
integer and float parameters; the function writes `nxt[i]`, `costs[c]`, `flows[f]` (and may use
`work[w]` as scratch). Run on numpy (`Rules.apply`), every `s[i]` is a column of a batch and the
writes fill whole columns; compiled with numba (`envs/models/compiled.py`), `s[i]` is one number
of one row. So the batch step, the env and the compiled simulator run the same source.

What keeps one source valid both ways: only `np.minimum`/`np.maximum`, arithmetic and
comparisons on values; coordinates read and written one index at a time (numba's slice copies
are slow); a local is never updated in place (`x = x - y`, not `x -= y`, which on numpy would
write through to the caller's array).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Callable

import numpy as np

from .base import Outcome

if TYPE_CHECKING:
    from invbench.envs.spec import InstanceSpec


@dataclass(frozen=True)
class Params:
    """One instance's parameters as the rules read them: int64 and float64 vectors, and the
    number of scratch entries the rules use."""

    ints: np.ndarray
    floats: np.ndarray
    work: int = 0


def params(ints: list[int], floats: list[float], work: int = 0) -> Params:
    return Params(np.asarray(ints, dtype=np.int64).reshape(-1), np.asarray(floats, dtype=np.float64).reshape(-1), work)


@dataclass(frozen=True)
class Rules:
    """A model's period function, the names of what it writes, and how an instance packs its
    parameters (`pack` returns None for an instance the function does not cover)."""

    period: Callable[..., None]
    costs: tuple[str, ...]
    flows: tuple[str, ...]
    pack: Callable[["InstanceSpec"], Params | None]
    #: pure functions `period` calls (compiled with it)
    helpers: tuple[Callable[..., Any], ...] = field(default=())

    def apply(self, spec: "InstanceSpec", state: np.ndarray, action: np.ndarray,
              demand: np.ndarray) -> tuple[np.ndarray, Outcome]:
        """The batch step on numpy: (next state [B, n], outcome with the named parts)."""
        p = self.pack(spec)
        if p is None:
            raise ValueError(f"{spec.model}: these rules do not cover this instance")
        state = np.asarray(state, dtype=np.int64)
        B = len(state)
        act = np.asarray(action, dtype=np.int64).reshape(B, -1)
        d = np.asarray(demand, dtype=np.int64).reshape(B)
        nxt = np.empty_like(state)
        costs = np.empty((len(self.costs), B))
        flows = np.empty((len(self.flows), B), dtype=np.int64)
        work = np.empty((p.work, B), dtype=np.int64)
        # transposed views: coordinate i of the whole batch is row i
        self.period(state.T, act.T, d, p.ints, p.floats, nxt.T, costs, flows, work)
        return nxt, self.outcome(costs, flows)

    def outcome(self, costs: np.ndarray, flows: np.ndarray) -> Outcome:
        """The Outcome of [parts, B] cost and flow arrays (rows are the named entries)."""
        return Outcome(dict(zip(self.costs, costs)), dict(zip(self.flows, flows)))


# ---------------------------------------------------------------------------- shared rule pieces
def pipeline_shift(s: Any, nxt: Any, first: int, width: int, incoming: Any) -> Any:
    """Move a block of orders in transit by one period: `s[first + 1 .. first + width - 1]`
    hold what arrives in 1 .. width - 1 periods; the next state gets them one period closer
    (`nxt[first + 1 ..]`) with `incoming` at the far end. Returns what arrives next period
    (the nearest entry, or `incoming` itself when the block has no transit entries)."""
    if width <= 1:
        return incoming
    arriving = s[first + 1]
    for i in range(first + 1, first + width - 1):
        nxt[i] = s[i + 1]
    nxt[first + width - 1] = incoming
    return arriving


def order_cost(order: Any, unit: float, fixed: float) -> Any:
    """Unit cost per unit ordered plus the fixed cost when the order is positive."""
    return unit * order + fixed * (order > 0)
