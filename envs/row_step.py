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

from .models.compiled import covered, one_row_driver
from .models.rules import Params, Rules
from .spec import InstanceSpec


class RowStep:
    """One period of one env copy: `step(state[1, n], action, rng)` -> (next state, info) or None."""

    def __init__(self, spec: InstanceSpec, rules: Rules, p: Params) -> None:
        self.one = one_row_driver(rules)
        self.cdf = spec.demand.pmf().cdf().tolist()
        self.top = len(self.cdf) - 1
        self.sizes = [s.sizes_units.tolist() for s in spec.order_slots]
        k, n = len(self.sizes), spec.state_dim
        self.k = k
        self.ints = np.zeros(k + 1 + len(rules.flows), dtype=np.int64)  # orders, demand, flows
        self.floats = np.zeros(len(rules.costs))  # costs
        self.keys = list(rules.flows) + [f"{c}_cost" for c in rules.costs]
        # two states' arrays take turns as this step's state and next state; the driver's
        # arguments for either turn are built once (building them per call was a third of a step)
        self.pair = [np.zeros((1, n), dtype=np.int64), np.zeros((1, n), dtype=np.int64)]
        rest = (self.ints, self.floats, p.ints, p.floats, np.zeros(max(p.work, 1), dtype=np.int64), k)
        self.calls = [(a, b, *rest) for a, b in (self.pair, self.pair[::-1])]
        self.turn = 0

    @classmethod
    def for_spec(cls, spec: InstanceSpec) -> "RowStep | None":
        found = covered(spec)
        return None if found is None else cls(spec, *found)

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
        ints = self.ints
        for j, u in enumerate(units):
            ints[j] = u
        d = min(bisect_right(self.cdf, rng.random()), self.top)
        ints[self.k] = d
        self.one(*self.calls[self.turn])
        self.turn = 1 - self.turn  # the next state's array holds the state of the next call
        self.pair.reverse()
        costs = self.floats.tolist()
        info: dict[str, Any] = {"order_units": units if len(units) > 1 else units[0], "demand": d}
        info.update(zip(self.keys, ints[self.k + 1:].tolist() + costs))
        info["cost"] = sum(costs)
        return self.pair[0], info


#: action types taken as one plain index without further checks (bool is refused by the codec)
_PLAIN_INTS = {int, np.int64, np.int32, np.int16, np.int8, np.uint64, np.uint32, np.uint16, np.uint8}
