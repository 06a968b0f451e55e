"""Distribution of the stock at the moment a new order arrives, from the current state.

The state is stepped L times through the model's own step function with no new orders, so
only the pipeline already placed comes in. `project_levels` keeps the first coordinate (the
on-hand under lost sales, the net inventory under backorders) just before this period's order
would be added; `project_states` keeps the whole state (perishable stock by age) and the
expected flows of those L periods (e.g. units outdated). Used by the PIL, myopic and
BSP-low-EW policies; all cache results per distinct state.

With a random lead time (orders in sequence) the state is stepped over the mean lead time
rounded to whole periods, against demand and the model's arrival cut-off jointly, so the orders
in transit come in as the model brings them; the whole state is then kept while projecting,
since equal stock levels no longer mean equal pipelines.
"""
from __future__ import annotations

import numpy as np

from invbench.envs.dynamics import step_fn
from invbench.envs.random_inputs import JointOutcomes, period_outcomes
from invbench.envs.spec import InstanceSpec

#: Rows stepped at once (states x stock levels x demand values) to bound temporary memory.
_ROWS = 2_000_000


def projection_periods(spec: InstanceSpec) -> int:
    """Periods until an order placed now arrives: L, or the mean of a random L rounded."""
    if spec.lead_time_law is None:
        return spec.lead_time
    return int(np.floor(spec.mean_lead_time + 0.5))


def project_levels(spec: InstanceSpec, states: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Triplets (owner, level, prob): for each input state `owner`, the pmf of its stock level
    when an order placed now arrives. Rows of one owner are contiguous."""
    states = np.asarray(states, dtype=np.int64)
    if spec.lead_time_law is not None and len(states):
        owner, rows, prob, _ = project_states(spec, states)
        level = rows[:, 0]
        lo = int(level.min())
        keys, first, inv = np.unique(owner * (int(level.max()) - lo + 1) + (level - lo), return_index=True,
                                     return_inverse=True)
        return owner[first], level[first], np.bincount(inv.reshape(-1), weights=prob, minlength=len(keys))
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


def project_states(spec: InstanceSpec, states: np.ndarray, flows: tuple[str, ...] = ()
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray, dict[str, np.ndarray]]:
    """(owner, rows, prob, expected): for each input state `owner`, the distribution of the
    whole state at the start of the period in which an order placed now arrives (rows [R, n],
    that order itself not yet added), and, per input state, the expected total of each flow in
    `flows` over the L periods before it (the step function's outcome flows, e.g. "outdated").
    Rows of one owner are contiguous; with L = 0 the rows are the states and the totals zero."""
    states = np.asarray(states, dtype=np.int64)
    expected = {f: np.zeros(len(states)) for f in flows}
    periods = projection_periods(spec)
    if periods == 0 or len(states) == 0:
        return np.arange(len(states)), states.copy(), np.ones(len(states)), expected
    step = step_fn(spec)
    outcomes = period_outcomes(spec, spec.demand.pmf().normalized())  # demand x any cut-off
    chunk = max(1, _ROWS // max(len(outcomes) ** min(periods, 3), 1))
    parts = []
    for i in range(0, len(states), chunk):
        owner, rows, prob, exp_i = _project_state_block(step, states[i:i + chunk], outcomes,
                                                        periods, flows)
        parts.append((owner + i, rows, prob))
        for f in flows:
            expected[f][i:i + chunk] = exp_i[f]
    owner, rows, prob = (np.concatenate(p) for p in zip(*parts))
    return owner, rows, prob, expected


def _project_state_block(step, states, outcomes: JointOutcomes, periods: int, flows: tuple[str, ...]):
    owner = np.arange(len(states))
    rows, prob = states, np.ones(len(states))
    expected = {f: np.zeros(len(states)) for f in flows}
    k = len(outcomes)
    for _ in range(periods):
        rep = np.repeat(np.arange(len(rows)), k)
        dd, extra, ww = outcomes.tiled(len(rows))
        nxt, out = step(rows[rep], np.zeros(len(rep), dtype=np.int64), dd, **extra)
        w = prob[rep] * ww
        own = owner[rep]
        for f in flows:
            expected[f] += np.bincount(own, weights=w * out.flows[f], minlength=len(states))
        # Equal (owner, state) rows are one row: merge them so the count stays that of the
        # distinct reachable states rather than growing as |demand values|^L.
        keyed = np.column_stack([own, nxt])
        keys = _row_keys(keyed)
        if keys is None:
            _, first, inv = np.unique(keyed, axis=0, return_index=True, return_inverse=True)
        else:
            _, first, inv = np.unique(keys, return_index=True, return_inverse=True)
        prob = np.bincount(inv.reshape(-1), weights=w, minlength=len(first))
        owner, rows = own[first], nxt[first]
    return owner, rows, prob, expected


def _row_keys(rows: np.ndarray) -> np.ndarray | None:
    """One int64 per row of a non-negative integer array, ordered like the rows
    lexicographically (None when the mixed-radix number would overflow): sorting one column
    is far quicker than np.unique(axis=0)."""
    if len(rows) == 0 or rows.min() < 0:
        return None
    radix = rows.max(axis=0).astype(np.int64) + 1
    if float(np.prod(radix.astype(float))) >= 2.0 ** 62:
        return None
    keys = np.zeros(len(rows), dtype=np.int64)
    for j in range(rows.shape[1]):
        keys = keys * radix[j] + rows[:, j]
    return keys


class StateCache:
    """Per-state values computed in batches for the distinct states not seen before."""

    def __init__(self, limit: int = 1_000_000) -> None:
        self.store: dict[bytes, np.ndarray] = {}
        self.limit = limit

    def get(self, states: np.ndarray, compute) -> np.ndarray:
        keys_int = _row_keys(states)
        if keys_int is None:
            uniq, inv = np.unique(states, axis=0, return_inverse=True)
        else:
            _, first, inv = np.unique(keys_int, return_index=True, return_inverse=True)
            uniq = states[first]
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
