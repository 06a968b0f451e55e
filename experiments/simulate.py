"""Batch simulation of a policy: R replications x T periods stepped together, common random numbers.

Demand in period t of replication r comes from the uniform U[t, r] of a generator seeded with
`seed`, drawn period by period; so every policy evaluated with the same seed on an instance
faces the same demand streams, and a run is reproducible bit for bit. A model's other random
inputs (a random lead time's cut-off) come from streams of their own (`random_inputs.py`), so
the demand stream of a seed is the same as with a fixed lead time. The work (period-steps)
and memory are estimated from the arguments and refused over their limits before anything runs.
"""
from __future__ import annotations

import time
from dataclasses import dataclass
from functools import partial
from typing import Any

import numpy as np
from scipy import stats

from invbench.baselines.policy import as_policy, checked_orders
from invbench.envs.models.compiled import compiled_step
from invbench.experiments.sim_kernels import compiled_costs
from invbench.envs.inventory_env import check_start
from invbench.envs.errors import BudgetError, SpecError
from invbench.envs.random_inputs import PeriodInputs
from invbench.envs.spec import load_spec

#: Default limit on replications x (warm-up + periods). One billion period-steps take a few
#: minutes at the batch simulator's recorded 7-12 million period-steps per second
#: (experiments/perf/RESULTS.md); raise it with `--max-period-steps` / `max_period_steps=`.
DEFAULT_MAX_PERIOD_STEPS = 1_000_000_000
#: Default limit on the simulation's working memory (the per-replication arrays), in MiB.
DEFAULT_MAX_MEMORY_MB = 4096
#: Recorded throughput used only to put a time on a refusal (experiments/perf/RESULTS.md).
_STEPS_PER_SECOND = 7e6


@dataclass
class SimulationResult:
    cost: float
    ci_halfwidth: float
    parts: dict[str, float]  # mean cost per period by named part (holding, shortage, ...)
    replications: int
    periods: int
    warmup: int
    seed: int
    seconds: float
    criterion: str
    per_replication: np.ndarray
    method: str = "simulated"
    clipped_orders: int = 0  # orders moved to a legal size (only when asked to clip)

    def __getattr__(self, key: str) -> float:
        parts = self.__dict__.get("parts") or {}
        if key in parts:  # cost parts read as attributes (result.holding), whatever the model
            return parts[key]
        raise AttributeError(key)

    def to_dict(self) -> dict[str, Any]:
        return {"cost": self.cost, "ci_halfwidth": self.ci_halfwidth, **self.parts,
                "replications": self.replications, "periods": self.periods, "warmup": self.warmup,
                "seed": self.seed, "seconds": self.seconds, "criterion": self.criterion, "method": self.method,
                "clipped_orders": self.clipped_orders}


def _check_int(name: str, v: Any, lo: int, hi: int | None = None) -> int:
    rng = f">= {lo}" if hi is None else f"in [{lo}, {hi}]"
    if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < lo or (hi is not None and v > hi):
        shown = repr(v) if len(repr(v)) <= 60 else repr(v)[:57] + "..."
        raise SpecError(f"{name}: must be an integer {rng}, got {shown}")
    return int(v)


def check_limit(name: str, v: Any, integer: bool = False) -> float:
    """A positive, finite budget (max_period_steps, max_memory_mb); SpecError naming it otherwise."""
    kind = "an integer" if integer else "a number"
    if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)):
        raise SpecError(f"{name}: must be {kind} > 0, got {v!r}")
    if not (np.isfinite(float(v)) and v > 0) or (integer and float(v) != int(v)):
        raise SpecError(f"{name}: must be a finite {kind[kind.index(' ') + 1:]} > 0, got {v!r}")
    return float(v)


def simulation_size(state_dim: int, replications: int, steps_per_replication: int) -> tuple[int, float]:
    """(period-steps, working memory in MiB) of a batch simulation, estimated before running it.

    Per replication and period the simulator holds the state (int64 and a float32 copy), orders,
    uniforms, demands, four cost parts and six accumulator entries: about 8 (2 n + 14) bytes,
    taken as 8 (3 n + 24) to leave room for a policy's own temporaries.
    """
    steps = replications * steps_per_replication
    mib = replications * 8 * (3 * state_dim + 24) / 2**20
    return steps, mib


def check_simulation_budget(state_dim: int, replications: int, steps_per_replication: int,
                            max_period_steps: float, max_memory_mb: float) -> None:
    """BudgetError with the estimate and the option to raise when a simulation is over its limits."""
    steps, mib = simulation_size(state_dim, replications, steps_per_replication)
    if steps > max_period_steps:
        hours = steps / _STEPS_PER_SECOND / 3600
        raise BudgetError(
            f"simulation: {replications:,} replications x {steps_per_replication:,} periods = {steps:.3g} "
            f"period-steps (about {hours:,.1f} h at {_STEPS_PER_SECOND:.0e} per second), over the limit of "
            f"{max_period_steps:.3g} (lower --replications/--periods, or raise --max-period-steps / max_period_steps=)")
    if mib > max_memory_mb:
        raise BudgetError(
            f"simulation: {replications:,} replications need about {mib:,.0f} MiB of working memory, over the "
            f"limit of {max_memory_mb:,.0f} MiB (lower --replications, or raise --max-memory-mb / max_memory_mb=)")


def demand_stream(spec: Any, rng: np.random.Generator, replications: int) -> np.ndarray:
    """One period of demands for all replications (the common-random-numbers draw)."""
    return spec.demand.from_uniforms(rng.random(replications))


def simulate(spec: Any, policy: Any, *, replications: int = 100, periods: int = 2000, warmup: int = 200,
             seed: int = 0, start: np.ndarray | None = None, progress: bool = False,
             max_period_steps: float = DEFAULT_MAX_PERIOD_STEPS,
             max_memory_mb: float = DEFAULT_MAX_MEMORY_MB, clip: bool = False) -> SimulationResult:
    """Mean cost per period over `periods` after `warmup`, with a 95 % CI across replications.

    Discounted instances (discount < 1): the discounted total from period 0 over `periods`
    periods (no warm-up), averaged over replications. Refused (BudgetError, with the estimate)
    when replications x (warmup + periods) is over `max_period_steps` or the working memory is
    over `max_memory_mb`. An order that is not a legal size is refused unless clip=True (then
    it is rounded down to one and counted in `clipped_orders`).
    """
    spec = load_spec(spec)
    R, T, W, seed = check_run(replications, periods, warmup, seed)
    discounted = spec.discount < 1
    check_simulation_budget(spec.state_dim, R, T if discounted else W + T,
                            check_limit("max_period_steps", max_period_steps),
                            check_limit("max_memory_mb", max_memory_mb))
    pol = as_policy(policy)
    model = spec.model_def
    rng = np.random.default_rng(seed)
    inputs = PeriodInputs(spec)
    input_rngs = inputs.streams(seed)
    state = np.repeat(check_start(spec, start), R, axis=0)
    names = model.cost_parts
    t0 = time.perf_counter()
    # Compiled paths (bit for bit the same numbers): the whole run when the model's rules cover
    # the instance and the policy is a linear order rule, else the loop below with the compiled step.
    fast = compiled_costs(spec, pol, state, rng, T if discounted else W + T, W, discounted, progress)
    step = compiled_step(spec) or partial(model.step, spec)
    acc = np.zeros((R, len(names))) if fast is None else fast
    clipped = 0
    weight = 1.0
    steps = range(0 if fast is not None else T if discounted else W + T)
    if progress:
        from tqdm import tqdm
        steps = tqdm(steps, desc="simulate", unit="period", leave=False)
    for t in steps:
        orders, n = checked_orders(spec, pol.act(state.astype(np.float32)), state, clip=clip)
        clipped += n
        demand = demand_stream(spec, rng, R)
        state, parts = step(state, orders, demand, **inputs.draw(input_rngs, R))
        if discounted:
            acc += weight * np.column_stack([parts.costs[k] for k in names])
            weight *= spec.discount
        elif t >= W:
            acc += np.column_stack([parts.costs[k] for k in names])
    per_rep = acc if discounted else acc / T
    total = per_rep.sum(axis=1)
    half = float(stats.t.ppf(0.975, R - 1) * total.std(ddof=1) / np.sqrt(R))
    m = per_rep.mean(axis=0)
    return SimulationResult(float(total.mean()), half, {k: float(m[j]) for j, k in enumerate(names)}, R, T, W,
                            seed, time.perf_counter() - t0, "discounted" if discounted else "average", total,
                            clipped_orders=clipped)


def check_run(replications: Any, periods: Any, warmup: Any, seed: Any) -> tuple[int, int, int, int]:
    """The run lengths and seed as integers in their ranges (SpecError naming the argument)."""
    return (_check_int("replications", replications, 2), _check_int("periods", periods, 1),
            _check_int("warmup", warmup, 0), _check_int("seed", seed, 0, 2**63 - 1))


