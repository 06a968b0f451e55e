"""Gymnasium actions <-> orders in units, for one or several order slots.

One slot: `Discrete(k)`, action i orders the i-th legal size (i * case_pack units). Several
slots (one order per supplier or stage): `MultiDiscrete`, one index per slot. Anything else is
refused with the allowed range; a float is accepted only when it holds a whole number.
"""
from __future__ import annotations

from typing import Any

import numpy as np
from gymnasium import spaces

from .errors import SpecError
from .spec import InstanceSpec


class ActionCodec:
    def __init__(self, spec: InstanceSpec) -> None:
        self.slots = spec.order_slots
        self.k = len(self.slots)
        self.n = np.array([len(s.sizes_units) for s in self.slots], dtype=np.int64)
        self.space = spaces.Discrete(int(self.n[0])) if self.k == 1 else spaces.MultiDiscrete(self.n)

    def indices(self, action: Any, batch: int) -> np.ndarray:
        """Action indices as int64 [batch, k], checked."""
        what = "action" if batch == 1 else "actions"
        shape = f"{self.k} per copy" if self.k > 1 else "one per copy"
        try:
            a = np.asarray(action)
            if a.dtype.kind not in "iuf" or a.dtype == np.bool_:
                raise ValueError
            af = a.astype(np.float64).reshape(batch, self.k)
        except (TypeError, ValueError):
            raise SpecError(f"{what}: must be integer indices ({shape}, batch {batch}) in "
                            f"{self._range()}, got {action!r}") from None
        if not np.all(np.isfinite(af)) or np.any(af != np.rint(af)) or np.any(af < 0) or np.any(af >= self.n):
            raise SpecError(f"{what}: must be integers in {self._range()}, got {np.asarray(action).tolist()!r}")
        return af.astype(np.int64)

    def orders(self, action: Any, batch: int) -> np.ndarray:
        """Orders in units [batch, k] for Gymnasium actions."""
        idx = self.indices(action, batch)
        return np.column_stack([self.slots[j].sizes_units[idx[:, j]] for j in range(self.k)])

    def _range(self) -> str:
        return ", ".join(f"[0, {n - 1}]" for n in self.n)
