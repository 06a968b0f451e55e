"""What an exact space may declare so the solver can work without a transition matrix.

Many models touch only one state coordinate with demand: given a state and an order, everything
but the stock level of the next state is fixed, and the stock level is `end(avail, d) + recv`,
with `avail` the stock available to meet demand d and `recv` what arrives at the start of the
next period. A space that knows this returns a `DemandSplit` from `ExactSpace.demand_split()`:
three integer maps that pick (and add) entries of u = [state, order] — the deterministic
post-decision part. The demand part, end(avail, d) and the costs, is not written here: the
solver reads it off the space's own step function, and checks the declared maps against that
step on a sample of the space before it relies on them (`baselines/split_mdp.py`).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class DemandSplit:
    """Linear maps from u = [state (n entries), order (k entries)] to the post-decision parts.

    avail_from[i]: weight of u[i] in the stock available to meet demand (u[0], the stock level,
    has weight 1); received_from[i]: weight of u[i] in what arrives at the start of next period;
    rest_from[j, i]: weight of u[i] in the next state's entry j + 1. Only avail may use u[0].
    """

    avail_from: np.ndarray  # [n + k] int
    received_from: np.ndarray  # [n + k] int
    rest_from: np.ndarray  # [n - 1, n + k] int

    @property
    def n(self) -> int:
        return self.rest_from.shape[0] + 1

    def apply(self, states: np.ndarray, actions: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(avail [B], recv [B], rest [B, n - 1]) for a batch of states and orders."""
        u = np.column_stack([np.asarray(states, dtype=np.int64), np.asarray(actions, dtype=np.int64)])
        return u @ self.avail_from, u @ self.received_from, u @ self.rest_from.T


def fixed_lead_time(spec: object) -> int | None:
    """The lead time when it is one fixed whole number of periods, else None (a random lead
    time adds a second random input, which this split does not describe)."""
    L = getattr(spec, "lead_time", None)
    if isinstance(L, (int, np.integer)) and not isinstance(L, bool):
        return int(L)
    return None


def pipeline_split(lead_time: int, n: int) -> DemandSplit:
    """The split of the stock-then-pipeline layout of `pipeline.py` (one order per period):
    state [stock, orders arriving in 1 .. L-1 periods]. It mirrors `stock_inputs` and `advance`
    there: with L = 0 the order is available at once; with L = 1 it is what arrives next period;
    with L >= 2 the order in slot 1 arrives, the others move up and the new order joins the end.
    """
    width = n + 1
    avail = np.zeros(width, dtype=np.int64)
    recv = np.zeros(width, dtype=np.int64)
    rest = np.zeros((n - 1, width), dtype=np.int64)
    avail[0] = 1
    if lead_time == 0:
        avail[n] = 1
    elif lead_time == 1:
        recv[n] = 1
    else:
        recv[1] = 1
        for j in range(n - 2):
            rest[j, j + 2] = 1
        rest[n - 2, n] = 1
    return DemandSplit(avail, recv, rest)
