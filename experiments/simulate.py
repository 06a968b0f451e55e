"""Batch simulation of a policy: R replications x T periods stepped together, common random numbers.

Demand in period t of replication r comes from the uniform U[t, r] of a generator seeded with
`seed`, drawn period by period; so every policy evaluated with the same seed on an instance
faces the same demand streams, and a run is reproducible bit for bit.
"""
from __future__ import annotations

import time
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats

from invbench.baselines.policy import as_policy, legal_orders
from invbench.envs.dynamics import initial_state, step_fn
from invbench.envs.errors import SpecError
from invbench.envs.spec import load_spec


@dataclass
class SimulationResult:
    cost: float
    ci_halfwidth: float
    holding: float
    shortage: float
    ordering: float
    replications: int
    periods: int
    warmup: int
    seed: int
    seconds: float
    criterion: str
    per_replication: np.ndarray
    method: str = "simulated"

    def to_dict(self) -> dict[str, Any]:
        return {"cost": self.cost, "ci_halfwidth": self.ci_halfwidth, "holding": self.holding,
                "shortage": self.shortage, "ordering": self.ordering, "replications": self.replications,
                "periods": self.periods, "warmup": self.warmup, "seed": self.seed, "seconds": self.seconds,
                "criterion": self.criterion, "method": self.method}


def _check_int(name: str, v: Any, lo: int) -> int:
    if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < lo:
        raise SpecError(f"{name}: must be an integer >= {lo}, got {v!r}")
    return int(v)


def _columns(parts: Any) -> np.ndarray:
    """holding, shortage, ordering and every other cost part of the model (e.g. outdating),
    so the total is the model's whole period cost."""
    named = parts.holding + parts.shortage + parts.ordering
    return np.column_stack([parts.holding, parts.shortage, parts.ordering, parts.total - named])


def demand_stream(spec: Any, rng: np.random.Generator, replications: int) -> np.ndarray:
    """One period of demands for all replications (the common-random-numbers draw)."""
    return spec.demand.from_uniforms(rng.random(replications))


def simulate(spec: Any, policy: Any, *, replications: int = 100, periods: int = 2000, warmup: int = 200,
             seed: int = 0, start: np.ndarray | None = None, progress: bool = False) -> SimulationResult:
    """Mean cost per period over `periods` after `warmup`, with a 95 % CI across replications.

    Discounted instances (discount < 1): the discounted total from period 0 over `periods`
    periods (no warm-up), averaged over replications.
    """
    spec = load_spec(spec)
    R = _check_int("replications", replications, 2)
    T = _check_int("periods", periods, 1)
    W = _check_int("warmup", warmup, 0)
    seed = _check_int("seed", seed, 0)
    pol = as_policy(policy)
    step = step_fn(spec)
    rng = np.random.default_rng(seed)
    state = initial_state(spec, R) if start is None else np.repeat(np.asarray(start, np.int64).reshape(1, -1), R, 0)
    discounted = spec.discount < 1
    acc = np.zeros((R, 4))
    weight = 1.0
    t0 = time.perf_counter()
    steps = range(T if discounted else W + T)
    if progress:
        from tqdm import tqdm
        steps = tqdm(steps, desc="simulate", unit="period", leave=False)
    for t in steps:
        orders = legal_orders(spec, pol.act(state.astype(np.float32)))
        demand = demand_stream(spec, rng, R)
        state, parts = step(state, orders, demand)
        if discounted:
            acc += weight * _columns(parts)
            weight *= spec.discount
        elif t >= W:
            acc += _columns(parts)
    per_rep = acc if discounted else acc / T
    total = per_rep.sum(axis=1)
    half = float(stats.t.ppf(0.975, R - 1) * total.std(ddof=1) / np.sqrt(R))
    m = per_rep.mean(axis=0)
    return SimulationResult(float(total.mean()), half, float(m[0]), float(m[1]), float(m[2]), R, T, W, seed,
                            time.perf_counter() - t0, "discounted" if discounted else "average", total)
