"""Pieces of the step shared by the single-order models: the pipeline shift and order cost.

State layout these helpers assume: state[:, 0] is the stock level after this period's receipt,
state[:, i] the order arriving i periods from now (i = 1 .. L-1, oldest first).
"""
from __future__ import annotations

import numpy as np


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
