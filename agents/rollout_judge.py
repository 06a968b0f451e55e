"""Which policy the rollout agent returns, judged apart from its training rollouts; and its pacing.

Candidates are the starting classical policy and the policy of every round. Each is judged on
its learning-curve point (`TrainingMonitor.record`), which is independent of the rollouts that
trained it: the exact long-run cost when the policy's reachable chain is small enough
(`baselines/policy_eval.py`), else a simulation on the curve's own common random numbers
(`eval_seed`, never the training seed). Two candidates are compared exactly when both have an
exact cost, else on that simulation (run then for a candidate that had only its exact cost).
A win on the simulation alone is confirmed exactly where both chains are small: the least of
many noisy points is biased low, and once one round's chain was too large the curve simulates
every later point. Measured: agents-mixed bo-K30-binom-L3-p19, seed 2, 300 CPU-s: a round
simulated 0.14 % below the start ((s, S), optimal) was returned, exactly 0.075 % above it.
The best so far is kept, so the result is never worse than the starting policy on this judge;
when the start stays best, it is what training returns.
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np

from invbench.envs.spec import InstanceSpec

from .scaling import Scaling


@dataclass
class Candidate:
    label: str  # "classical" or "round N"
    policy: Any = field(repr=False)
    exact: float | None
    simulated: float | None  # None until a comparison needs it (the point had an exact cost)
    exact_tried: bool = False  # a confirmation was attempted (not again, even when refused)


class Judge:
    """Keeps the best candidate seen; `offer` takes the candidate's learning-curve row and its
    simulated cost; `simulate(policy)` gives a simulated cost when a comparison needs one."""

    def __init__(self, simulate: Callable[[Any], float],
                 exact: Callable[[Any], float | None] | None = None) -> None:
        self.simulate, self.exact = simulate, exact
        self.best: Candidate | None = None
        self.history: list[dict[str, Any]] = []

    def _simulated(self, c: Candidate) -> float:
        if c.simulated is None:
            c.simulated = float(self.simulate(c.policy))
        return c.simulated

    def beats(self, a: Candidate, b: Candidate) -> bool:
        if a.exact is not None and b.exact is not None:
            return _cheaper(a.exact, b.exact)
        won = self._simulated(a) < self._simulated(b)
        if won and self.exact is not None:
            for c in (a, b):
                if c.exact is None and not c.exact_tried:
                    c.exact_tried, c.exact = True, self.exact(c.policy)
            if a.exact is not None and b.exact is not None:
                return _cheaper(a.exact, b.exact)
        return won

    def offer(self, label: str, policy: Any, row: dict[str, Any], simulated: float | None) -> bool:
        c = Candidate(label, policy, row.get("exact_cost"), simulated)
        won = self.best is None or self.beats(c, self.best)
        if won:
            self.best = c
        self.history.append({"label": label, "exact_cost": c.exact, "cost": row["cost"], "best": won})
        return won


def _cheaper(a: float, b: float) -> bool:
    return a < b - 1e-12 * max(1.0, abs(b))


@dataclass
class RolloutRun:
    """What `run_rollout_agent` hands back to `train`."""

    final: Any  # the last round's policy (or the start, when no round ran)
    steps_done: int
    best: Any  # the judged best policy
    chosen: str  # "classical", "final" or "best" (an earlier round)
    rounds: int
    start: dict[str, Any]
    judged: list[dict[str, Any]]


def widen_for(spec: InstanceSpec, scaling: Scaling, act: Any, states: np.ndarray, settings: Any) -> Scaling:
    """A scaling whose order sizes and position cap (the automatic ones) cover what the starting
    policy does on its own states: e.g. (s, S) orders batches larger than a demand quantile, or
    an echelon base-stock policy refills a serial stage after the stage above ran short, which
    the network could not otherwise express."""
    from .settings import AUTO
    if scaling.n_slots > 1:
        return _widen_slots(spec, scaling, act, states, settings)
    orders = np.asarray(act(states), dtype=np.int64).reshape(-1)
    q = scaling.case_pack
    units, cap = scaling.max_order_units, scaling.position_cap
    margin = int(np.ceil(2 * np.sqrt(spec.demand.var)))  # room to learn a little above the start's levels
    if settings.max_order_units == AUTO and len(orders) and orders.max() > units:
        units = int(min(-(-(int(orders.max()) + margin) // q) * q, spec.order_cap_units))
    if settings.position_cap == AUTO and cap > 0 and len(orders) and (states.sum(axis=1) + orders).max() > cap:
        cap = int((states.sum(axis=1) + orders).max()) + margin
    if (units, cap) == (scaling.max_order_units, scaling.position_cap):
        return scaling
    return dataclasses.replace(scaling, max_order_units=units, position_cap=cap, slot_sizes=())


def _widen_slots(spec: InstanceSpec, scaling: Scaling, act: Any, states: np.ndarray, settings: Any) -> Scaling:
    """Several slots: each head widened to the slot's legal sizes up to the start's largest order
    there plus a margin (automatic bounds only)."""
    from .scaling import sizes_reaching
    from .settings import AUTO
    if settings.max_order_units != AUTO or not len(states):
        return scaling
    orders = np.asarray(act(states), dtype=np.int64).reshape(len(states), scaling.n_slots)
    margin = int(np.ceil(2 * np.sqrt(spec.demand.var)))
    slots = []
    for j, (sizes, slot) in enumerate(zip(scaling.slot_sizes, spec.order_slots)):
        top = int(orders[:, j].max())
        if top > sizes[-1]:
            sizes = sizes_reaching(slot.sizes_units, top + margin)
        slots.append(tuple(sizes))
    if tuple(slots) == scaling.slot_sizes:
        return scaling
    return dataclasses.replace(scaling, max_order_units=max(s[-1] for s in slots), slot_sizes=tuple(slots))


def round_states(planned: int, last_round_cpu: float, remaining_cpu: float | None, floor: int) -> int:
    """States to label this round so that it ends inside the CPU budget (0: stop now).

    A round's time grows with its states; the last one is shortened to the time left rather
    than overrunning the budget, and skipped when less than a quarter of a round is left.
    """
    if remaining_cpu is None or last_round_cpu <= 0 or remaining_cpu >= last_round_cpu:
        return planned
    if remaining_cpu < 0.25 * last_round_cpu:
        return 0
    return max(int(planned * remaining_cpu / last_round_cpu), min(floor, planned))
