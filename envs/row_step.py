"""The Gymnasium env's step for a batch of one, without numpy's per-call overhead.

The model's compiled period rules (`models/compiled.py`) do the step; the action check, the
demand draw and the info dict are plain Python on Python numbers. The results are those of the
numpy path bit for bit: the demand is the same inverse CDF of the same uniform
(`Demand.from_uniforms`; one `rng.random()` is one `rng.random(1)`), and the info dict has the
same keys, order and values (`inventory_env.info_dict`). Anything the quick action check does
not accept goes to the numpy path, which checks it and says what is wrong.
"""
from __future__ import annotations

from bisect import bisect_right
from typing import Any

import numpy as np

from .models.compiled import CompiledStep, covered
from .spec import InstanceSpec


class RowStep:
    """One period of one env copy: `step(state[1, n], action, rng)` -> (next state, info) or None."""

    def __init__(self, spec: InstanceSpec, compiled: CompiledStep) -> None:
        self.compiled = compiled
        self.args = (compiled.params.ints, compiled.params.floats)
        self.cdf = spec.demand.pmf().cdf().tolist()
        self.top = len(self.cdf) - 1
        self.sizes = [s.sizes_units.tolist() for s in spec.order_slots]
        k, n = len(self.sizes), spec.state_dim
        self.order = np.zeros((1, k), dtype=np.int64)
        self.demand = np.zeros(1, dtype=np.int64)
        self.costs = np.zeros((len(compiled.rules.costs), 1))
        self.flows = np.zeros((len(compiled.rules.flows), 1), dtype=np.int64)
        self.keys = list(compiled.rules.flows) + [f"{c}_cost" for c in compiled.rules.costs]
        # two states' arrays take turns as this step's state and next state; the driver's
        # arguments for either turn are built once (building them per call was a third of a step)
        self.pair = [np.zeros((1, n), dtype=np.int64), np.zeros((1, n), dtype=np.int64)]
        rest = (self.costs, self.flows, compiled.work, *compiled.buffers)
        self.calls = [(a, self.order, self.demand, *self.args, b, *rest) for a, b in (self.pair, self.pair[::-1])]
        self.turn = 0

    @classmethod
    def for_spec(cls, spec: InstanceSpec) -> "RowStep | None":
        found = covered(spec)
        if found is None:
            return None
        return cls(spec, CompiledStep(*found, spec.state_dim, len(spec.order_slots)))

    def units(self, action: Any) -> list[int] | None:
        """Units per slot for a plain in-range index (or an integer vector of them); None otherwise."""
        sizes = self.sizes
        if action.__class__ in _PLAIN_INTS:  # a set lookup: isinstance against numpy's ABCs is slow
            if len(sizes) == 1 and 0 <= action < len(sizes[0]):
                return [sizes[0][action]]
            return None
        if isinstance(action, np.ndarray) and action.dtype.kind in "iu" and action.size == len(sizes):
            idx = action.reshape(-1).tolist()
            if all(0 <= i < len(s) for i, s in zip(idx, sizes)):
                return [s[i] for i, s in zip(idx, sizes)]
        return None

    def step(self, state: np.ndarray, action: Any, rng: np.random.Generator) -> tuple[np.ndarray, dict] | None:
        units = self.units(action)
        if units is None:
            return None
        if state is not self.pair[0]:  # after a reset: start from the env's state in our buffer
            np.copyto(self.pair[0], state)
        order = self.order
        for j, u in enumerate(units):
            order[0, j] = u
        d = min(bisect_right(self.cdf, rng.random()), self.top)
        self.demand[0] = d
        self.compiled.rows(*self.calls[self.turn])
        self.turn = 1 - self.turn  # the next state's array holds the state of the next call
        self.pair.reverse()
        costs = self.costs[:, 0].tolist()
        info: dict[str, Any] = {"order_units": units if len(units) > 1 else units[0], "demand": d}
        info.update(zip(self.keys, self.flows[:, 0].tolist() + costs))
        info["cost"] = sum(costs)
        return self.pair[0], info


#: action types taken as one plain index without further checks (bool is refused by the codec)
_PLAIN_INTS = {int, np.int64, np.int32, np.int16, np.int8, np.uint64, np.uint32, np.uint16, np.uint8}
