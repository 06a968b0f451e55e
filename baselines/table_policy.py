"""A policy given by a table of orders over the solver's finite state space (e.g. the optimum)."""
from __future__ import annotations

from typing import Any

import numpy as np

from invbench.envs.spec import InstanceSpec

from .policy import PolicyBase
from .state_index import StateIndex
from .state_space import Bounds


class TablePolicy(PolicyBase):
    """Orders looked up per state. Off the table the rule is explicit (see `act`)."""

    name = "optimal"

    def __init__(self, spec: InstanceSpec, representation: str, index: StateIndex, orders: np.ndarray,
                 bounds: Bounds) -> None:
        self.spec = spec
        self.representation = representation
        self.index = index
        self.orders = np.asarray(orders, dtype=np.int64)
        self.bounds = bounds

    @property
    def states(self) -> np.ndarray:
        return self.index.states

    def act(self, obs: np.ndarray) -> np.ndarray:
        """Orders in units for a batch of observations.

        Off the table: a position above the upper bound orders nothing (the bound is an upper
        limit on the optimal position after ordering); for backorders, a position below the
        lower bound orders what the lowest state orders plus the shortfall, in whole packs.
        """
        x = np.rint(np.asarray(obs, dtype=np.float64)).astype(np.int64)
        if x.ndim == 1:
            x = x[None, :]
        if self.representation == "backorder_position":
            y = x.sum(axis=1)
            lo, hi = self.bounds.lower, self.bounds.upper
            idx = np.clip(y, lo, hi) - lo
            out = self.orders[idx].copy()
            below = y < lo
            q = self.spec.case_pack
            out[below] += -((y[below] - lo) // q) * q
            out[y > hi] = 0
            return np.minimum(out, self.spec.order_cap_units)
        pos = self.index.lookup(x)
        out = np.zeros(len(x), dtype=np.int64)
        found = pos >= 0
        out[found] = self.orders[pos[found]]
        return out

    def params(self) -> dict[str, Any]:
        return {"states": len(self.index)}

    def describe(self) -> str:
        return "optimal (table)"
