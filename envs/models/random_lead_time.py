"""Arrivals under a random lead time, for the single-order models with a pipeline (lost sales,
backorders). The lead-time law and its cut-off are in `envs/lead_time.py`.

State layout, M = the longest lead time, observed at the start of a period: [0] on-hand stock
(net inventory under backorders) plus the order now M periods old, which arrives this period
for sure; [i], i = 1..M-1, the order placed M - i periods ago if it is still out (oldest
first, as for a fixed lead time). After the order is placed, the period's arrivals are drawn:
every outstanding order whose age a (0 for the order just placed) is flagged arrives, before
demand. In sequence (Kaplan 1970) the flags are a >= A for the period's cut-off A, so an order
never overtakes an older one; with crossing each age is flagged on its own, with probability
the hazard of the lead time at a. With a point mass at M this is the fixed-lead-time step.
"""
from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from invbench.envs.random_inputs import InputLaw

if TYPE_CHECKING:
    from invbench.envs.spec import InstanceSpec

NO_EXACT = ("lead_time.crossing: lead times drawn per order (orders may cross) are simulated only; "
            "no exact optimum or exact evaluation is computed for them")


def arrival_inputs(spec: "InstanceSpec") -> tuple[InputLaw, ...]:
    """The random input of the arrivals: the cut-off ("cutoff", one integer per row) in
    sequence, or one flag per age 0..M-1 ("arrivals") when orders may cross."""
    law = spec.lead_time_law
    if law is None:
        return ()
    if law.crossing:
        M = law.longest
        return (InputLaw("arrivals", thresholds=law.hazards()[:M], no_exact=NO_EXACT),) if M else ()
    return (InputLaw("cutoff", probs=law.cutoff_pmf()),)


def simulation_only(spec: "InstanceSpec") -> str:
    return NO_EXACT if spec.lead_time_kind == "crossing" else ""


class RandomLeadTimeHooks:
    """The model hooks of a single-order model that takes `lead_time = { pmf = [...] }`."""

    def random_inputs(self, spec: "InstanceSpec") -> tuple[InputLaw, ...]:
        return arrival_inputs(spec)

    def simulation_only(self, spec: "InstanceSpec") -> str:
        return simulation_only(spec)


def state_labels(first: str, longest: int) -> list[str]:
    """Labels of the random-lead-time layout (`first` names the stock coordinate)."""
    s = (lambda a: "s" if a > 1 else "")
    head = f"{first}, with the order placed {longest} period{s(longest)} ago (arrives now for sure)"
    return [head] + [f"order placed {longest - i} period{s(longest - i)} ago, if still out" for i in range(1, longest)]


def arrival_mask(longest: int, rows: int, inputs: dict[str, np.ndarray]) -> np.ndarray:
    """[rows, M] booleans: whether the outstanding order of age a (0..M-1) arrives now."""
    if longest == 0:
        return np.zeros((rows, 0), dtype=bool)
    if "cutoff" in inputs:
        cut = np.asarray(inputs["cutoff"], dtype=np.int64).reshape(rows, 1)
        return np.arange(longest)[None, :] >= cut
    if "arrivals" in inputs:
        return np.asarray(inputs["arrivals"]).reshape(rows, longest).astype(bool)
    raise ValueError("step: a random lead time needs its arrivals input ('cutoff' or 'arrivals'); "
                     "draw it with invbench.envs.random_inputs.PeriodInputs")


def receive_random(spec: "InstanceSpec", state: np.ndarray, order: np.ndarray,
                   inputs: dict[str, np.ndarray]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The period's arrivals in the random-lead-time layout: (units arrived before demand
    [B], the pipeline orders still out [B, M-1] by state column, the new order if still out [B])."""
    M = spec.longest_lead_time
    mask = arrival_mask(M, len(state), inputs)
    pipe = state[:, 1:] if M >= 1 else np.zeros((len(state), 0), dtype=np.int64)
    arrive_pipe = mask[:, M - np.arange(1, M)]  # column i holds the order aged M - i
    arrive_new = mask[:, 0] if M >= 1 else np.ones(len(state), dtype=bool)
    arrived = np.where(arrive_pipe, pipe, 0).sum(axis=1) + np.where(arrive_new, order, 0)
    return arrived, np.where(arrive_pipe, 0, pipe), np.where(arrive_new, 0, order)


def advance_random(state: np.ndarray, rest: np.ndarray, new_rest: np.ndarray, end_level: np.ndarray,
                   longest: int) -> tuple[np.ndarray, np.ndarray]:
    """Age every order still out by one period; the one turning M periods old joins the stock
    coordinate (it arrives next period for sure). Returns the next state and those units."""
    nxt = np.empty_like(state)
    if longest == 0:
        received = np.zeros_like(new_rest)
    elif longest == 1:
        received = new_rest
    else:
        received = rest[:, 0]
        nxt[:, 1:-1] = rest[:, 1:]
        nxt[:, -1] = new_rest
    nxt[:, 0] = end_level + received
    return nxt, received
