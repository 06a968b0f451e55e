"""A small common-random-numbers cost estimate for any policy, used for learning curves.

Replications share the uniforms fixed by the seed, so two policies (or two checkpoints of one
agent) see the same demands and their difference has little noise.
"""
from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any, Callable

import numpy as np

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


def crn_cost(spec: InstanceSpec, act: Callable[[np.ndarray], np.ndarray], *, replications: int = 32,
             periods: int = 1000, warmup: int = 100, seed: int = 0) -> CrnEstimate:
    """Simulate `act` (state batch -> orders in units) from the empty state.

    A thin view of the bench's batch simulator (`experiments.simulate`), so learning curves and
    benchmark cells measure with the same common random numbers.
    """
    from invbench.experiments.simulate import simulate

    sim = simulate(spec, act, replications=max(replications, 2), periods=periods, warmup=warmup, seed=seed)
    return CrnEstimate(cost=sim.cost, ci_halfwidth=sim.ci_halfwidth, holding=sim.holding, shortage=sim.shortage,
                       ordering=sim.ordering, replications=sim.replications, periods=periods, warmup=warmup,
                       seed=seed)
