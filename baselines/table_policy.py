"""A policy given by a table of orders over the solver's finite state space (e.g. the optimum).

The table can be saved (`table_data`) and rebuilt (`from_table`) for a policy folder
(`artifact.py`): all states of the solver's space, or a subset such as the reachable ones.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from invbench.envs.errors import SpecError
from invbench.envs.models.exact_space import Bounds, ExactSpace
from invbench.envs.models.state_index import StateIndex
from invbench.envs.spec import InstanceSpec

from .policy import PolicyBase


class TablePolicy(PolicyBase):
    """Orders looked up per state; off the table the model's exact space says what happens."""

    name = "optimal"

    def __init__(self, spec: InstanceSpec, space: ExactSpace, index: StateIndex, orders: np.ndarray,
                 bounds: Bounds) -> None:
        self.spec = spec
        self.space = space
        self.representation = space.representation
        self.index = index
        self.orders = np.asarray(orders, dtype=np.int64).reshape(len(index), -1)  # [S, k]
        self.bounds = bounds
        self.complete = True  # every state of the space (False: a saved subset, e.g. reachable)

    @property
    def states(self) -> np.ndarray:
        return self.index.states

    def act(self, obs: np.ndarray) -> np.ndarray:
        """Orders in units for a batch of observations ([B], or [B, k] with several order slots)."""
        x = np.asarray(obs, dtype=np.float64)
        if x.ndim == 1:
            x = x[None, :]
        n = self.spec.state_dim
        if x.ndim != 2 or x.shape[1] != n:
            raise SpecError(f"state: must have {n} entries per row, got shape {list(x.shape)}")
        if not np.all(np.isfinite(x)) or np.any(x != np.rint(x)):
            raise SpecError("state: entries must be whole numbers (units)")
        states = x.astype(np.int64)
        low = self.spec.model_def.state_low(self.spec)
        if np.any(states < low):
            bad = states[np.argmax(np.any(states < low, axis=1))]
            raise SpecError(f"state: {list(map(int, bad))} has an entry below its minimum {list(low)}")
        if self.complete:
            out = self.space.table_orders(self.index, self.orders, self.bounds, states)
        else:
            out = self._subset_orders(states)
        return out[:, 0] if out.shape[1] == 1 else out

    def _subset_orders(self, states: np.ndarray) -> np.ndarray:
        """A saved subset: states on it as stored, a position above the upper bound orders
        nothing (as on the full table), any other state is refused."""
        pos = self.index.lookup(self.space.table_keys(states))
        out = np.zeros((len(states), self.orders.shape[1]), dtype=np.int64)
        found = pos >= 0
        out[found] = self.orders[pos[found]]
        missing = ~found & (self.spec.model_def.position(self.spec, states) <= self.bounds.upper)
        if np.any(missing):
            bad = states[np.argmax(missing)]
            raise SpecError(f"state: {list(map(int, bad))} is not in the saved table (it holds the {len(self.index):,} "
                            "states reachable from the empty start; save it with all states to cover every state "
                            f"with entries >= their minimum and position <= {self.bounds.upper})")
        return out

    def params(self) -> dict[str, Any]:
        return {"states": len(self.index), "representation": self.representation,
                "bounds": self.bounds.to_dict(), "complete": self.complete}

    # ------------------------------------------------------------------ saving and loading
    def table_data(self, rows: np.ndarray | None = None) -> tuple[dict[str, Any], dict[str, np.ndarray]]:
        """(definition for policy.json, arrays) of the table, or of its `rows` only."""
        states, orders = self.index.states, self.orders
        if rows is not None:
            states, orders = states[rows], orders[rows]
        complete = self.complete and (rows is None or len(rows) == len(self.index))
        definition = {"representation": self.representation, "bounds": self.bounds.to_dict(),
                      "states": int(len(states)), "complete": bool(complete),
                      "order_slots": [s.name for s in self.spec.order_slots]}
        return definition, {"states": np.ascontiguousarray(states, dtype=np.int64),
                            "orders": np.ascontiguousarray(orders, dtype=np.int64)}

    @classmethod
    def from_table(cls, spec: InstanceSpec, definition: dict[str, Any], arrays: dict[str, np.ndarray]) -> "TablePolicy":
        """Rebuild a saved table for `spec`; SpecError naming what does not fit."""
        from .exact import exact_space
        rep = definition.get("representation")
        space = exact_space(spec)
        if space.representation != rep:
            try:
                space = exact_space(spec, full_pipeline=True)
            except SpecError:
                pass
        if space.representation != rep:
            raise SpecError(f"table: representation {rep!r} does not fit the {spec.model} model")
        try:
            b = Bounds(int(definition["bounds"]["upper"]), int(definition["bounds"]["lower"]))
        except (KeyError, TypeError, ValueError):
            raise SpecError("table: bounds must hold integers upper and lower") from None
        states, orders = arrays.get("states"), arrays.get("orders")
        k = len(spec.order_slots)
        if (states is None or orders is None or states.ndim != 2 or states.shape[1] != space.dim
                or orders.shape != (len(states), k) or states.dtype != np.int64 or orders.dtype != np.int64):
            raise SpecError(f"table: needs int64 states [S, {space.dim}] and orders [S, {k}]")
        for j, slot in enumerate(spec.order_slots):
            if not np.all(np.isin(orders[:, j], slot.sizes_units)):
                raise SpecError(f"table: orders of {slot.name} are not all legal sizes (multiples of "
                                f"{spec.case_pack} in [0, {slot.cap_units}])")
        codec = space.codec(b)
        keys = codec.encode(states)
        order = np.argsort(keys, kind="stable")
        if len(keys) > 1 and np.any(np.diff(keys[order]) == 0):
            raise SpecError("table: a state appears twice")
        index = StateIndex(codec, states[order])
        pol = cls(spec, space, index, orders[order], b)
        pol.complete = bool(definition.get("complete"))
        if pol.complete:  # the full-table lookup relies on it (e.g. positions lower..upper in order)
            full = space.states(b)
            if len(full) != len(states) or not np.array_equal(np.sort(codec.encode(full)), index.keys):
                raise SpecError(f"table: marked complete but its {len(states):,} states are not the "
                                f"{len(full):,} states of the space")
        return pol

    def describe(self) -> str:
        return "optimal (table)"
