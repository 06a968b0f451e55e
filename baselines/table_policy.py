"""A policy given by a table of orders over the solver's finite state space (e.g. the optimum)."""
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
        out = self.space.table_orders(self.index, self.orders, self.bounds, states)
        return out[:, 0] if out.shape[1] == 1 else out

    def params(self) -> dict[str, Any]:
        return {"states": len(self.index)}

    def describe(self) -> str:
        return "optimal (table)"
