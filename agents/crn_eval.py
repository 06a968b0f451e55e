"""The common-random-numbers cost estimate used for learning curves and reference costs.

A thin view of the bench's batch simulator (`experiments.simulate`), so learning curves and
benchmark cells measure with the same common random numbers: two checkpoints evaluated with
the same seed see the same demands, and their difference has little noise.
"""
from __future__ import annotations

from typing import Any, Callable

import numpy as np

from invbench.envs.spec import InstanceSpec
from invbench.experiments.simulate import SimulationResult, simulate


def crn_cost(spec: InstanceSpec, act: Callable[[np.ndarray], Any], *, replications: int = 32,
             periods: int = 1000, warmup: int = 100, seed: int = 0) -> SimulationResult:
    """Simulate `act` (state batch -> orders in units) from the empty state."""
    return simulate(spec, act, replications=max(replications, 2), periods=periods, warmup=warmup, seed=seed)
