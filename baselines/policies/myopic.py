"""Myopic policy: the order that minimises the expected cost of the period in which it arrives.

Exactly what is minimised, for an order of q units placed now (q over the legal sizes 0, pack,
2 pack, ... up to the cap): E[holding + shortage of period t + L] + ordering cost of q, where
the stock at the start of period t + L is X + q, X the stock the pipeline already placed leaves
then (`_projection`: on-hand under lost sales, net inventory under backorders), and holding and
shortage are those of one period of demand on X + q. The ordering cost is the spec's
unit_order_cost x q + fixed_order_cost x [q > 0], as the step function charges it. Later periods
are ignored; ties go to the smaller order. Under backorders this is min_q G(position + q) +
ordering cost, i.e. base-stock at the minimiser of G when ordering is free. No parameters.

Perishable goods: the same criterion on the whole state. The state at the start of period
t + L (stock by remaining life, the pipeline already placed come in, no other orders) is
projected by the step function (`_projection.project_states`); the order of q units is added
where the step function puts an arriving order (found by stepping the empty state with one
unit ordered and no demand), and the period is stepped once over the demand pmf. Minimised:
E[holding + shortage + outdating of period t + L] + ordering cost of q. The outdating counted
is that of the arrival period only: units of the new order that would perish in later periods
are not charged, which is what makes the rule myopic.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from invbench.envs.dynamics import step_fn
from invbench.envs.spec import InstanceSpec

from ._common import ClassicalPolicy, as_states, check_names
from ._projection import StateCache, project_levels, project_states

#: Cost-table cells (projected rows x order sizes) handled at once.
_CELLS = 4_000_000


class _PeriodCost:
    """g(a): expected holding + shortage of one period that starts with stock a, on a grid
    that grows as needed; computed with the step function (L = 0, no ordering cost)."""

    def __init__(self, spec: InstanceSpec) -> None:
        self.step = step_fn(spec.with_(lead_time=0, unit_order_cost=0.0, fixed_order_cost=0.0))
        pmf = spec.demand.pmf().normalized()
        self.d = np.flatnonzero(pmf > 0)
        self.p = pmf[self.d]
        self.lo, self.vals = 0, np.zeros(0)

    def _compute(self, levels: np.ndarray) -> np.ndarray:
        x = np.repeat(levels, len(self.d))
        _, parts = self.step(x[:, None], np.zeros_like(x), np.tile(self.d, len(levels)))
        return (parts.holding + parts.shortage).reshape(len(levels), len(self.d)) @ self.p

    def table(self, lo: int, hi: int) -> tuple[int, np.ndarray]:
        cur_hi = self.lo + len(self.vals) - 1
        if len(self.vals) == 0 or lo < self.lo or hi > cur_hi:
            lo2 = lo if len(self.vals) == 0 else min(lo, self.lo)
            hi2 = hi if len(self.vals) == 0 else max(hi, cur_hi)
            self.lo, self.vals = lo2, self._compute(np.arange(lo2, hi2 + 1))
        return self.lo, self.vals


class _ArrivalCost:
    """For states of any layout: E[period cost except ordering] of the period in which an order
    of each legal size arrives, from the projected states of that period (cached per row)."""

    def __init__(self, spec: InstanceSpec) -> None:
        self.spec = spec
        self.step = step_fn(spec)
        self.sizes = spec.order_sizes_units
        pmf = spec.demand.pmf().normalized()
        self.d = np.flatnonzero(pmf > 0)
        self.p = pmf[self.d]
        self.slot = self._arrival_slot() if spec.lead_time > 0 else None
        self.cache = StateCache()

    def _arrival_slot(self) -> np.ndarray:
        """Where one unit ordered now sits when it arrives (a unit state vector)."""
        state = np.zeros((1, self.spec.state_dim), dtype=np.int64)
        zero = np.zeros(1, dtype=np.int64)
        for t in range(self.spec.lead_time):
            state, _ = self.step(state, zero + (1 if t == 0 else 0), zero)
        if state.sum() != 1 or state.min() < 0:
            raise ValueError(f"myopic: cannot locate an arriving order in the {self.spec.model} state")
        return state[0]

    def _table(self, rows: np.ndarray) -> np.ndarray:
        """[K, sizes] for arrival-period rows (the order itself not yet added)."""
        k_q, k_d = len(self.sizes), len(self.d)
        out = np.empty((len(rows), k_q))
        chunk = max(1, _CELLS // (k_q * k_d))
        for i in range(0, len(rows), chunk):
            blk = rows[i:i + chunk]
            n = len(blk)
            if self.slot is None:  # L = 0: the order is the step's own action, arriving at once
                st = np.repeat(blk, k_q * k_d, axis=0)
                act = np.tile(np.repeat(self.sizes, k_d), n)
            else:
                with_q = blk[:, None, :] + self.sizes[None, :, None] * self.slot[None, None, :]
                st = np.repeat(with_q.reshape(n * k_q, -1), k_d, axis=0)
                act = np.zeros(len(st), dtype=np.int64)
            _, parts = self.step(st, act, np.tile(self.d, n * k_q))
            cost = (parts.total - parts.ordering).reshape(n, k_q, k_d)
            out[i:i + chunk] = cost @ self.p
        return out

    def expected(self, states: np.ndarray) -> np.ndarray:
        owner, rows, prob, _ = project_states(self.spec, states)
        table = self.cache.get(rows, self._table)
        out = np.zeros((len(states), len(self.sizes)))
        np.add.at(out, owner, table * prob[:, None])
        return out


class MyopicPolicy(ClassicalPolicy):
    """One-period-ahead cost minimiser (see the module docstring for the exact criterion)."""

    name = "myopic"
    models = ("lost_sales", "backorder", "perishable")

    def __init__(self, spec: InstanceSpec) -> None:
        self.spec = spec
        self._sizes = spec.order_sizes_units
        # Ordering cost of each legal size, from the step function itself.
        _, parts = step_fn(spec)(np.zeros((len(self._sizes), spec.state_dim), dtype=np.int64),
                                 self._sizes, np.zeros(len(self._sizes), dtype=np.int64))
        self._order_cost = parts.ordering
        # Lost sales and backorders reach the arrival period with a one-number state; other
        # models (stock by age) keep the whole state.
        self._by_level = spec.model_def.stock_then_pipeline
        if self._by_level:
            self._g = _PeriodCost(spec)
        else:
            self._arrival = _ArrivalCost(spec)
        self._cache = StateCache()

    def params(self) -> dict[str, Any]:
        return {}

    def expected_costs(self, states: np.ndarray) -> np.ndarray:
        """[U, sizes]: the minimised criterion for each state and each legal order size."""
        if not self._by_level:
            return self._arrival.expected(np.asarray(states, dtype=np.int64)) + self._order_cost[None, :]
        owner, level, prob = project_levels(self.spec, np.asarray(states, dtype=np.int64))
        lo, g = self._g.table(int(level.min()), int(level.max()) + int(self._sizes[-1]))
        out = np.zeros((len(states), len(self._sizes)))
        step = max(1, _CELLS // len(self._sizes))
        for i in range(0, len(owner), step):
            sl = slice(i, i + step)
            cells = g[level[sl, None] - lo + self._sizes[None, :]] * prob[sl, None]
            np.add.at(out, owner[sl], cells)
        return out + self._order_cost[None, :]

    def _best(self, states: np.ndarray) -> np.ndarray:
        return self._sizes[np.argmin(self.expected_costs(states), axis=1)].reshape(-1, 1)

    def act(self, obs: np.ndarray) -> np.ndarray:
        states = as_states(obs, self.spec)
        return self._cache.get(states, self._best)[:, 0]

    @classmethod
    def from_params(cls, spec: InstanceSpec, **params: Any) -> "MyopicPolicy":
        check_names(cls.name, params, ())
        return cls(spec)

    @classmethod
    def optimize(cls, spec: InstanceSpec, progress: bool = False,
                 max_states: int | None = None) -> "MyopicPolicy":
        """Nothing to tune: the policy itself (with no cost attached)."""
        return cls(spec)
