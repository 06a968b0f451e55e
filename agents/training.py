"""`train(spec, agent=...)`: train an agent on the batch simulator and export its greedy policy.

One entry point for the SB3 agents (ppo, a2c, dqn) and our rollout agent. The output directory
holds the exported policy (policy.json + weights.safetensors), the learning curve, checkpoints
and `train.json` with this run's TrainResult.
"""
from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec, load_spec

from .settings import AUTO, SB3_AGENTS, CommonSettings, sb3_settings, to_jsonable

AGENTS = (*SB3_AGENTS, "rollout")
TRAIN_FILE = "train.json"


@dataclass
class TrainResult:
    """What a training run produced; `policy` is the exported (greedy) policy."""

    agent: str
    instance: dict[str, Any]
    seed: int
    steps: int
    steps_done: int
    wall_seconds: float
    cpu_seconds: float
    settings: dict[str, Any]
    scaling: dict[str, Any]
    measured: dict[str, Any]
    curve: list[dict[str, Any]]
    out: str | None
    policy: Any = field(repr=False, default=None)
    chosen: str = "final"  # "final" or "best" (best learning-curve point)
    eval_cpu_seconds: float = 0.0  # CPU of the learning curve's points (part of cpu_seconds)

    @property
    def cost(self) -> float:
        return float(self.measured["cost"])

    @property
    def gap(self) -> float | None:
        return self.measured.get("gap")

    def to_dict(self) -> dict[str, Any]:
        d = {f.name: getattr(self, f.name) for f in dataclasses.fields(self) if f.name != "policy"}
        d["policy"] = self.policy.to_dict() if self.policy is not None else None
        return d


def resolve_settings(agent: str, settings: Any) -> CommonSettings:
    """Settings for `agent` from None, a mapping of overrides, or a settings object."""
    if agent not in AGENTS:
        raise SpecError(f"agent: must be one of {', '.join(AGENTS)}, got {agent!r}")
    if isinstance(settings, CommonSettings):
        return settings
    if settings is not None and not isinstance(settings, Mapping):
        raise SpecError("settings: must be a mapping of agent settings or a settings object")
    if agent == "rollout":
        from .rollout_agent import RolloutSettings
        from .settings import apply_overrides
        return apply_overrides(RolloutSettings(), settings, agent)
    return sb3_settings(agent, settings)


def _check_run(steps: Any, seed: Any, max_cpu_seconds: Any, select_best: Any) -> tuple[int, int]:
    if isinstance(steps, bool) or not isinstance(steps, int) or not 1 <= steps <= 10**12:
        raise SpecError(f"steps: must be an integer in [1, 1e12], got {steps!r}")
    if isinstance(seed, bool) or not isinstance(seed, int) or not 0 <= seed < 2**32:
        raise SpecError(f"seed: must be an integer in [0, 4294967295], got {seed!r}")
    if (isinstance(max_cpu_seconds, bool) or not isinstance(max_cpu_seconds, (int, float))
            or not math.isfinite(max_cpu_seconds) or max_cpu_seconds < 0):
        raise SpecError(f"max_cpu_seconds: must be a finite number >= 0 (0: no limit), got {max_cpu_seconds!r}")
    if not isinstance(select_best, bool):
        raise SpecError(f"select_best: must be True or False, got {select_best!r}")
    return steps, seed


def _check_curve_budget(spec: InstanceSpec, s: CommonSettings) -> None:
    """Each learning-curve point is a simulation: refuse one over the simulator's limits up front."""
    from invbench.envs.errors import BudgetError
    from invbench.experiments.simulate import DEFAULT_MAX_MEMORY_MB, DEFAULT_MAX_PERIOD_STEPS, simulation_size
    reps = max(int(s.eval_replications), 2)
    per_rep = s.eval_periods if spec.discount < 1 else s.eval_warmup + s.eval_periods
    steps, mib = simulation_size(spec.state_dim, reps, per_rep)
    if steps > DEFAULT_MAX_PERIOD_STEPS or mib > DEFAULT_MAX_MEMORY_MB:
        raise BudgetError(f"agent.eval_replications / agent.eval_periods: each learning-curve point would simulate "
                          f"{reps:,} x {per_rep:,} = {steps:.3g} period-steps in about {mib:,.0f} MiB, over the limits "
                          f"of {DEFAULT_MAX_PERIOD_STEPS:.0e} period-steps and {DEFAULT_MAX_MEMORY_MB:,} MiB "
                          "(lower these settings)")


def train(spec: Any, agent: str = "ppo", steps: int = 200_000, seed: int = 0, out: str | Path | None = None,
          settings: Any = None, *, optimum: Any = AUTO, max_cpu_seconds: float = 0.0,
          select_best: bool = True) -> TrainResult:
    """Train `agent` on `spec` (InstanceSpec, dict or TOML path) for `steps` environment steps.

    optimum: "auto" (exact solver when the instance fits its budget), None, a number or a
    SolveResult — used for the gap on the learning curve and in the result.
    max_cpu_seconds: stop early once this process has used that much CPU time (0: no limit).
    select_best: export the best learning-curve policy rather than the last one.
    """
    import torch

    from invbench.cli_args import check_output_dir
    spec = load_spec(spec)
    steps, seed = _check_run(steps, seed, max_cpu_seconds, select_best)
    s = resolve_settings(agent, settings)
    from .sb3_agents import check_agent_fits
    check_agent_fits(agent, spec)
    _check_curve_budget(spec, s)
    if out is not None and not isinstance(out, (str, Path)):
        raise SpecError(f"out: must be a directory path or None, got {type(out).__name__}")
    out_dir = check_output_dir(out, "out") if out is not None else None  # before any work
    torch.set_num_threads(int(s.threads))
    torch.manual_seed(seed)
    opt = _optimum(spec, optimum, s.progress)
    t0, c0 = time.perf_counter(), time.process_time()
    from .callbacks import TrainingMonitor
    from .scaling import scaling_for
    scaling = scaling_for(spec, s)
    monitor = TrainingMonitor(spec, s, steps, out_dir, optimum=opt, max_cpu_seconds=max_cpu_seconds)
    try:
        if agent == "rollout":
            from .rollout_agent import run_rollout_agent
            final, done = run_rollout_agent(spec, s, scaling, steps, seed, monitor)
        else:
            final, done = _run_sb3(agent, spec, s, scaling, steps, seed, monitor)
        monitor.finish(done, final)
    finally:
        monitor.close()
    chosen, policy = "final", final
    if select_best and monitor.best is not None and monitor.best[1] is not final:
        chosen, policy = "best", monitor.best[1]
    wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    from .callbacks import one_torch_thread
    from .measurement import measure
    with one_torch_thread():
        measured = measure(spec, policy, opt)
    if not monitor.rows:
        monitor.from_measurement(done, measured)
    training = {"agent": agent, "steps": steps, "steps_done": done, "seed": seed, "settings": to_jsonable(s),
                "wall_seconds": wall, "cpu_seconds": cpu, "eval_cpu_seconds": monitor.eval_cpu,
                "torch_threads": int(s.threads), "chosen": chosen}
    policy.meta.update(training=training, measured=measured)
    result = TrainResult(agent, spec.to_dict(), seed, steps, done, wall, cpu, to_jsonable(s), scaling.to_dict(),
                         measured, list(monitor.rows), str(out_dir) if out_dir else None, policy, chosen,
                         monitor.eval_cpu)
    if out_dir is not None:
        from .export import write_json_atomic
        policy.save(out_dir)
        write_json_atomic(out_dir / TRAIN_FILE, result.to_dict())
    return result


def _optimum(spec: InstanceSpec, optimum: Any, progress: bool) -> float | None:
    if optimum is None:
        return None
    if isinstance(optimum, str):
        if optimum != AUTO:
            raise SpecError(f"optimum: must be 'auto', None, a number or a solve result, got {optimum!r}")
        from .measurement import solve_optimum
        res = solve_optimum(spec, progress=progress)
        return None if res is None else float(res.cost)
    v = getattr(optimum, "cost", optimum)
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        raise SpecError(f"optimum: must be 'auto', None, a finite number or a solve result, got {optimum!r}")
    return float(v)


def _run_sb3(agent: str, spec: InstanceSpec, s: Any, scaling: Any, steps: int, seed: int, monitor: Any) -> tuple[Any, int]:
    from .callbacks import sb3_callback
    from .sb3_agents import extract_policy, make_model

    model = make_model(agent, spec, s, scaling, seed)

    def current() -> Any:
        return extract_policy(model, agent, spec, s, scaling)

    model.learn(total_timesteps=steps, callback=sb3_callback(monitor, current), progress_bar=False)
    return current(), int(model.num_timesteps)
