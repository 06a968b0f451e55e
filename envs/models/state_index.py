"""Integer keys for state vectors, so sets of states can be sorted, merged and looked up in numpy.

Coordinate 0 (stock level, may be negative under backorders) gets an offset; the other
coordinates are non-negative and bounded (stock by age, orders in transit). Keys are a mixed-radix code in int64 with the
stock level as the *least* significant digit: in a sorted index, states that differ only in
stock level are then neighbours, which the fast solver path relies on.
"""
from __future__ import annotations

import numpy as np

from invbench.envs.errors import BudgetError


class StateCodec:
    """Encodes rows of an int state array [B, n] into int64 keys and back."""

    def __init__(self, n: int, pipeline_max: int) -> None:
        self.n = n
        self.pipe_radix = int(pipeline_max) + 1
        tail = self.pipe_radix ** (n - 1)
        if tail > 2**40:
            raise BudgetError(f"state space: {n - 1} pipeline slots with orders up to {pipeline_max} "
                              "are too many to index")
        # The stock level gets what is left of 62 bits.
        self.offset = int(min(2**30, (2**61) // tail // 2))
        self.tail = tail

    def encode(self, states: np.ndarray) -> np.ndarray:
        s = np.asarray(states, dtype=np.int64)
        if np.any(np.abs(s[:, 0]) >= self.offset):
            raise BudgetError(f"state space: stock level beyond +-{self.offset} cannot be indexed")
        key = np.zeros(len(s), dtype=np.int64)
        for i in range(self.n - 1, 0, -1):
            key = key * self.pipe_radix + s[:, i]
        return key * (2 * self.offset) + (s[:, 0] + self.offset)

    def decode(self, keys: np.ndarray) -> np.ndarray:
        keys = np.asarray(keys, dtype=np.int64)
        out = np.empty((len(keys), self.n), dtype=np.int64)
        out[:, 0] = keys % (2 * self.offset) - self.offset
        rest = keys // (2 * self.offset)
        for i in range(1, self.n):
            out[:, i] = rest % self.pipe_radix
            rest //= self.pipe_radix
        return out


class StateIndex:
    """A fixed, sorted set of states with vectorised lookup (index or -1 when absent)."""

    def __init__(self, codec: StateCodec, states: np.ndarray) -> None:
        self.codec = codec
        keys = codec.encode(states)
        states = np.asarray(states, dtype=np.int64)
        if len(keys) > 1 and not np.all(keys[1:] > keys[:-1]):  # rows given in order keep their arrays
            order = np.argsort(keys, kind="stable")
            keys, states = keys[order], states[order]
        self.keys = keys
        self.states = states

    def __len__(self) -> int:
        return len(self.keys)

    def lookup_keys(self, keys: np.ndarray) -> np.ndarray:
        pos = np.searchsorted(self.keys, keys)
        pos_c = np.minimum(pos, len(self.keys) - 1)
        found = self.keys[pos_c] == keys
        return np.where(found, pos_c, -1)

    def lookup(self, states: np.ndarray) -> np.ndarray:
        return self.lookup_keys(self.codec.encode(states))
