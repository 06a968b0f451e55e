"""A small common-random-numbers cost estimate for any policy, used for learning curves.

Replications share one matrix of uniforms fixed by the seed, so two policies (or two
checkpoints of one agent) see the same demands and their difference has little noise. Every
period is one call of the model's step function over all replications.
"""
from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any, Callable

import numpy as np

from invbench.envs.dynamics import initial_state, step_fn
from invbench.envs.spec import InstanceSpec


@dataclass(frozen=True)
class CrnEstimate:
    """Average cost per period over the measured periods, with a 95 % CI over replications."""

    cost: float
    ci_halfwidth: float
    holding: float
    shortage: float
    ordering: float
    replications: int
    periods: int
    warmup: int
    seed: int

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def crn_uniforms(seed: int, replications: int, periods: int) -> np.ndarray:
    """The uniforms of a CRN run: row t holds period t's uniforms of all replications."""
    return np.random.default_rng(seed).random((periods, replications))


def crn_cost(spec: InstanceSpec, act: Callable[[np.ndarray], np.ndarray], *, replications: int = 32,
             periods: int = 1000, warmup: int = 100, seed: int = 0,
             start: np.ndarray | None = None) -> CrnEstimate:
    """Simulate `act` (state batch -> orders in units) from the empty state (or `start`)."""
    step = step_fn(spec)
    u = crn_uniforms(seed, replications, warmup + periods)
    state = initial_state(spec, replications) if start is None else np.array(start, dtype=np.int64)
    totals = np.zeros((3, replications))
    for t in range(warmup + periods):
        order = np.asarray(act(state), dtype=np.int64).reshape(replications)
        state, parts = step(state, order, spec.demand.from_uniforms(u[t]))
        if t >= warmup:
            totals[0] += parts.holding
            totals[1] += parts.shortage
            totals[2] += parts.ordering
    per_rep = totals / periods
    cost_rep = per_rep.sum(axis=0)
    half = 1.96 * float(cost_rep.std(ddof=1)) / np.sqrt(replications) if replications > 1 else float("nan")
    return CrnEstimate(cost=float(cost_rep.mean()), ci_halfwidth=half, holding=float(per_rep[0].mean()),
                       shortage=float(per_rep[1].mean()), ordering=float(per_rep[2].mean()),
                       replications=replications, periods=periods, warmup=warmup, seed=seed)
