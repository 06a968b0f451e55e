"""Distribution of the stock level at the moment a new order arrives, from the current state.

The state is stepped L times through the model's own step function with no new orders, so
only the pipeline already placed comes in; after L steps the first coordinate is the on-hand
(lost sales) or net inventory (backorders) just before this period's order would be added.
Used by the PIL and myopic policies; both cache results per distinct state.
"""
from __future__ import annotations

import numpy as np

from invbench.envs.dynamics import step_fn
from invbench.envs.spec import InstanceSpec

#: Rows stepped at once (states x stock levels x demand values) to bound temporary memory.
_ROWS = 2_000_000


def project_levels(spec: InstanceSpec, states: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Triplets (owner, level, prob): for each input state `owner`, the pmf of its stock level
    when an order placed now arrives. Rows of one owner are contiguous."""
    states = np.asarray(states, dtype=np.int64)
    if spec.lead_time == 0 or len(states) == 0:
        idx = np.arange(len(states))
        return idx, states[:, 0].copy(), np.ones(len(states))
    step = step_fn(spec)
    pmf = spec.demand.pmf().normalized()
    dvals = np.flatnonzero(pmf > 0)
    dprob = pmf[dvals]
    per_state = (spec.lead_time + 1) * len(dvals) ** 2  # rough rows per state at the last step
    chunk = max(1, _ROWS // max(per_state, 1))
    out = [_project_block(step, states[i:i + chunk], dvals, dprob, spec.lead_time, i)
           for i in range(0, len(states), chunk)]
    return tuple(np.concatenate(parts) for parts in zip(*out))  # type: ignore[return-value]


def _project_block(step, states, dvals, dprob, lead_time: int, offset: int):
    owner = np.arange(len(states))
    rows, prob = states, np.ones(len(states))
    for _ in range(lead_time):
        k = len(dvals)
        rep = np.repeat(np.arange(len(rows)), k)
        nxt, _ = step(rows[rep], np.zeros(len(rep), dtype=np.int64), np.tile(dvals, len(rows)))
        w = prob[rep] * np.tile(dprob, len(rows))
        own = owner[rep]
        # The pipeline part of the state is the same for all rows of one owner, so (owner,
        # stock level) identifies a row; merge equal ones on a single integer key.
        level = nxt[:, 0]
        lo = level.min()
        keys, first, inv = np.unique(own * (level.max() - lo + 1) + (level - lo), return_index=True,
                                     return_inverse=True)
        prob = np.bincount(inv.reshape(-1), weights=w, minlength=len(keys))
        owner, rows = own[first], nxt[first]
    return owner + offset, rows[:, 0].copy(), prob


class StateCache:
    """Per-state values computed in batches for the distinct states not seen before."""

    def __init__(self, limit: int = 1_000_000) -> None:
        self.store: dict[bytes, np.ndarray] = {}
        self.limit = limit

    def get(self, states: np.ndarray, compute) -> np.ndarray:
        uniq, inv = np.unique(states, axis=0, return_inverse=True)
        inv = inv.reshape(-1)
        keys = [row.tobytes() for row in uniq]
        missing = [i for i, key in enumerate(keys) if key not in self.store]
        if missing:
            if len(self.store) + len(missing) > self.limit:
                self.store.clear()  # memory guard for very long runs; values are recomputable
            vals = compute(uniq[missing])
            for i, v in zip(missing, vals):
                self.store[keys[i]] = v
        return np.stack([self.store[key] for key in keys])[inv]
