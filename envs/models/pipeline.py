"""Pieces of the step shared by the single-order models: the pipeline shift and order cost.

State layout these helpers assume: state[:, 0] is the stock level after this period's receipt,
state[:, i] the order arriving i periods from now (i = 1 .. L-1, oldest first).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Callable

import numpy as np

if TYPE_CHECKING:
    from invbench.envs.spec import InstanceSpec


def ordering_cost(order: np.ndarray, unit: float, fixed: float) -> np.ndarray:
    return unit * order + fixed * (order > 0)


def stock_inputs(state: np.ndarray, action: np.ndarray, demand: np.ndarray,
                 lead_time: int) -> tuple[np.ndarray, ...]:
    """Integer arrays (order as [B]), and the stock available to meet demand (with the order
    too when L = 0, since it arrives at once)."""
    state = np.asarray(state, dtype=np.int64)
    order = np.asarray(action, dtype=np.int64).reshape(len(state), -1)[:, 0]
    demand = np.asarray(demand, dtype=np.int64)
    return state, order, demand, state[:, 0] + (order if lead_time == 0 else 0)


def advance(state: np.ndarray, order: np.ndarray, end_level: np.ndarray,
            lead_time: int) -> tuple[np.ndarray, np.ndarray]:
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


def pipeline_labels(first: str, lead_time: int) -> list[str]:
    return [first] + [f"units arriving in {i} period{'s' if i > 1 else ''}" for i in range(1, lead_time)]


@dataclass
class Receipt:
    """What a period brings in before demand (fixed or random lead time), and how the pipeline
    moves on once the end-of-period stock is known (`advance(end) -> (next state, received)`)."""

    state: np.ndarray
    order: np.ndarray
    demand: np.ndarray
    available: np.ndarray
    advance: Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]]
    flows: dict[str, np.ndarray] = field(default_factory=dict)


def receive(spec: "InstanceSpec", state: np.ndarray, action: np.ndarray, demand: np.ndarray,
            inputs: dict[str, np.ndarray]) -> Receipt:
    """The stock available to meet demand and the pipeline shift, for either kind of lead time."""
    if spec.lead_time_law is None:
        if inputs:
            raise ValueError(f"step: a fixed lead time takes no other random input, got {sorted(inputs)}")
        L = spec.lead_time
        state, order, demand, available = stock_inputs(state, action, demand, L)
        return Receipt(state, order, demand, available, lambda end: advance(state, order, end, L))
    from .random_lead_time import advance_random, receive_random
    state, order, demand, _ = stock_inputs(state, action, demand, 1)
    arrived, rest, new_rest = receive_random(spec, state, order, inputs)
    M = spec.longest_lead_time
    return Receipt(state, order, demand, state[:, 0] + arrived,
                   lambda end: advance_random(state, rest, new_rest, end, M), {"arrived": arrived})


def layout_labels(spec: "InstanceSpec", first: str) -> list[str]:
    """State labels of a stock-then-pipeline model, for a fixed or a random lead time."""
    if spec.lead_time_law is None:
        return pipeline_labels(first, max(spec.lead_time, 1))
    from .random_lead_time import state_labels
    return state_labels(first, spec.longest_lead_time)
