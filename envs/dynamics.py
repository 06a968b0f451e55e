"""The one vectorised step function per model, shared by env, exact solver and batch simulator.

State layout (both models), length n = max(L, 1), observed at the start of a period *after*
the delivery due in that period has been received:

    state[:, 0]   on-hand stock (lost sales) or net inventory = on-hand - backorders (backorders)
    state[:, i]   the order that arrives i periods from now, i = 1 .. L-1 (oldest first)

An order placed now arrives L periods later before that period's demand; with L = 0 it is
available at once. The next state therefore receives state[:, 1] (or, for L = 1, the new order)
into its first coordinate, and the new order joins the pipeline at the end.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from .spec import InstanceSpec


@dataclass(frozen=True)
class StepParts:
    """What happened in one period, per row of the batch. Costs are per period."""

    holding: np.ndarray
    shortage: np.ndarray
    ordering: np.ndarray
    sales: np.ndarray
    shortfall: np.ndarray  # units lost (lost sales) or backordered at the end of the period
    end_level: np.ndarray  # on-hand / net inventory at the end of the period, after demand
    received: np.ndarray  # units that arrive at the start of the next period

    @property
    def total(self) -> np.ndarray:
        return self.holding + self.shortage + self.ordering


StepFn = Callable[[np.ndarray, np.ndarray, np.ndarray], tuple[np.ndarray, StepParts]]


def _ordering_cost(order: np.ndarray, unit: float, fixed: float) -> np.ndarray:
    return unit * order + fixed * (order > 0)


def _advance(state: np.ndarray, order: np.ndarray, end_level: np.ndarray, lead_time: int) -> tuple[np.ndarray, np.ndarray]:
    """Shift the pipeline by one period; returns the next state and the units received."""
    nxt = np.empty_like(state)
    if lead_time == 0:
        received = np.zeros_like(order)
    elif lead_time == 1:
        received = order
    else:
        received = state[:, 1]
        nxt[:, 1:-1] = state[:, 2:]
        nxt[:, -1] = order
    nxt[:, 0] = end_level + received
    return nxt, received


def _inputs(state: np.ndarray, order: np.ndarray, demand: np.ndarray, lead_time: int) -> tuple[np.ndarray, ...]:
    """Integer arrays, and the stock available to meet demand (this order too when L = 0)."""
    state = np.asarray(state, dtype=np.int64)
    order = np.asarray(order, dtype=np.int64)
    demand = np.asarray(demand, dtype=np.int64)
    return state, order, demand, state[:, 0] + (order if lead_time == 0 else 0)


def lost_sales_step(state: np.ndarray, order: np.ndarray, demand: np.ndarray, *, lead_time: int,
                    holding_cost: float, shortage_cost: float, unit_order_cost: float = 0.0,
                    fixed_order_cost: float = 0.0) -> tuple[np.ndarray, StepParts]:
    """One period of the lost-sales model: unmet demand is lost at a cost per unit."""
    state, order, demand, available = _inputs(state, order, demand, lead_time)
    sales = np.minimum(available, demand)
    end = available - sales
    lost = demand - sales
    nxt, received = _advance(state, order, end, lead_time)
    parts = StepParts(holding=holding_cost * end, shortage=shortage_cost * lost,
                      ordering=_ordering_cost(order, unit_order_cost, fixed_order_cost),
                      sales=sales, shortfall=lost, end_level=end, received=received)
    return nxt, parts


def backorder_step(state: np.ndarray, order: np.ndarray, demand: np.ndarray, *, lead_time: int,
                   holding_cost: float, shortage_cost: float, unit_order_cost: float = 0.0,
                   fixed_order_cost: float = 0.0) -> tuple[np.ndarray, StepParts]:
    """One period of the backorder model: unmet demand waits, at a cost per unit per period."""
    state, order, demand, available = _inputs(state, order, demand, lead_time)
    end = available - demand
    # Sales: this period's demand met at once from stock (the fill); the rest waits.
    sales = np.minimum(np.maximum(available, 0), demand)
    backordered = np.maximum(-end, 0)
    nxt, received = _advance(state, order, end, lead_time)
    parts = StepParts(holding=holding_cost * np.maximum(end, 0), shortage=shortage_cost * backordered,
                      ordering=_ordering_cost(order, unit_order_cost, fixed_order_cost),
                      sales=sales, shortfall=backordered, end_level=end, received=received)
    return nxt, parts


_STEPS = {"lost_sales": lost_sales_step, "backorder": backorder_step}


def step_fn(spec: InstanceSpec) -> StepFn:
    """The model's step function with the instance's parameters bound in."""
    base = _STEPS[spec.model]
    kw = dict(lead_time=spec.lead_time, holding_cost=spec.holding_cost, shortage_cost=spec.shortage_cost,
              unit_order_cost=spec.unit_order_cost, fixed_order_cost=spec.fixed_order_cost)

    def step(state: np.ndarray, order: np.ndarray, demand: np.ndarray) -> tuple[np.ndarray, StepParts]:
        return base(state, order, demand, **kw)

    return step


def initial_state(spec: InstanceSpec, batch: int = 1) -> np.ndarray:
    """The default start: no stock, nothing in transit."""
    return np.zeros((batch, spec.state_dim), dtype=np.int64)
