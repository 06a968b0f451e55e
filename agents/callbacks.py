"""What happens while an agent trains: progress bar, learning curve, checkpoints, time budget.

`TrainingMonitor` is agent-agnostic (our rollout agent calls it directly); `SB3Callback` adapts
it to stable-baselines3. A learning-curve point measures the current greedy policy with common
random numbers (the same demands each time, so the curve's wiggles are the policy's, not the
noise's) and, when its reachable chain is small enough, exactly; a row goes to
`learning_curve.csv`, with the gap to the optimum when that is known and the CPU seconds the
point took.

When points are taken: with `eval_every = auto` only when the policy has changed (after an SB3
update, after a rollout-agent round), at most about 20 times a run, and only while the curve's
simulated periods stay within `EVAL_PERIODS_PER_STEP` per training step (about 10 % of the
training CPU); a fixed `eval_every` takes a point every K environment steps, as set. A point
falls due every 1/20 of the step budget or, with a CPU budget, every 1/20 of that (whichever
comes first): a run bounded by CPU (the bench gives agents a near-endless step count and 300
CPU-seconds) would otherwise reach no step mark and keep no curve to choose its best point from.
"""
from __future__ import annotations

import csv
import io
import math
import os
import random
import time
from contextlib import contextmanager
from pathlib import Path
from typing import Any, Callable, Iterator

import numpy as np
import torch

from tqdm.auto import tqdm

from invbench.envs.spec import InstanceSpec

from invbench.experiments.simulate import simulate
from .export import _atomic_write
from .settings import AUTO, CommonSettings

CURVE_FILE = "learning_curve.csv"
CURVE_COLUMNS = ("step", "wall_seconds", "cpu_seconds", "cost", "ci_halfwidth", "gap_pct", "exact_cost",
                 "exact_gap_pct", "eval_cpu_seconds")
#: with eval_every = auto the curve's points may use at most this share of the training's CPU time
EVAL_CPU_SHARE = 0.10
#: Most work (stored transitions x sweeps) of a point's exact evaluation's iteration; one that
#: needs more is abandoned for simulation. Without it a point on a slowly mixing serial chain near
#: the 200,000-state budget took 290 CPU-seconds (agents-mixed, ser-n2-L2.1-p19-nb, rollout seed
#: 1). Measured on the 2-core development machine: 4.2 ns per stored transition and sweep, so
#: about 4 s; a 185,000-state chain of that instance (10.6 M transitions) converges well within.
CURVE_EXACT_WORK = 1e9
#: with eval_every = auto, at most about this many points per run
AUTO_POINTS = 20
#: With eval_every = auto a point is taken only when the simulated periods of all points so far
#: stay within this many per training step. A count, not a CPU reading, so that the points taken
#: (and so the best point exported) are the same on a busy and an idle machine: the same seed
#: gives the same policy. Measured (PPO defaults, [64, 64] network, one thread, the 2-core
#: development machine): about 3.8 ms of training CPU per step and 0.2 to 0.4 s per default
#: point of 32 x 1,100 periods, so 40 periods per step would spend about 10 %; 30 keeps margin.
EVAL_PERIODS_PER_STEP = 30


def resolve_every(value: Any, steps: int, points: int) -> int:
    """`auto` -> about `points` events over the run; 0 stays 0 (off)."""
    if value == AUTO:
        return max(int(math.ceil(steps / points)), 1)
    return int(value)


class TrainingMonitor:
    """Learning curve, best-so-far policy, checkpoints and the CPU-time budget of one run."""

    def __init__(self, spec: InstanceSpec, settings: CommonSettings, steps: int, out: Path | None,
                 optimum: float | None = None, max_cpu_seconds: float = 0.0) -> None:
        self.spec, self.settings, self.steps, self.out = spec, settings, steps, out
        self.optimum = optimum
        self.auto_eval = settings.eval_every == AUTO
        self.eval_every = resolve_every(settings.eval_every, steps, AUTO_POINTS)
        self.eval_cpu = 0.0  # CPU seconds spent on curve points
        self.checkpoint_every = resolve_every(settings.checkpoint_every, steps, 5)
        self.max_cpu_seconds = max_cpu_seconds
        self.rows: list[dict[str, Any]] = []
        self.best: tuple[float, Any] | None = None
        self._next_eval = self.eval_every
        # with a CPU budget a point is also due every 1/AUTO_POINTS of it (training CPU)
        self._cpu_every = max_cpu_seconds / AUTO_POINTS if (self.auto_eval and max_cpu_seconds > 0) else 0.0
        self._next_eval_cpu = self._cpu_every
        self._next_ckpt = self.checkpoint_every if self.checkpoint_every > 0 else None
        self._t0, self._c0 = time.perf_counter(), time.process_time()
        self.bar = tqdm(total=steps, unit="step", disable=not settings.progress, dynamic_ncols=True, leave=False)
        self._tb = _tensorboard(out) if out is not None else None

    # ------------------------------------------------------------------ timing
    def cpu_seconds(self) -> float:
        return time.process_time() - self._c0

    def wall_seconds(self) -> float:
        return time.perf_counter() - self._t0

    def train_cpu_seconds(self) -> float:
        """CPU seconds of the run so far, without those spent on the learning curve."""
        return self.cpu_seconds() - self.eval_cpu

    def point_periods(self) -> int:
        """Simulated periods of one learning-curve point."""
        s = self.settings
        return max(int(s.eval_replications), 2) * (int(s.eval_warmup) + int(s.eval_periods))

    def affordable(self, step: int, reserve: int = 0) -> bool:
        """Whether one more point (plus `reserve` more) keeps the curve within its share at `step`
        (EVAL_PERIODS_PER_STEP; deterministic, see there; under a CPU budget also the measured
        CPU, see below). The CPU each point really took is recorded."""
        taken = [r["eval_cpu_seconds"] for r in self.rows if r.get("eval_cpu_seconds")]
        if (len(taken) + 1 + reserve) * self.point_periods() > EVAL_PERIODS_PER_STEP * step:
            return False
        if self.max_cpu_seconds > 0 and taken:
            # A CPU-bounded run ends on the clock, so it is not repeatable anyway: here the
            # measured CPU of the points (exact evaluations of large chains included, which the
            # count above does not see) is kept within EVAL_CPU_SHARE of the training's.
            return self.eval_cpu + (1 + reserve) * self._point_cpu <= EVAL_CPU_SHARE * self.train_cpu_seconds()
        return True

    def out_of_time(self) -> bool:
        return self.max_cpu_seconds > 0 and self.cpu_seconds() >= self.max_cpu_seconds

    # ------------------------------------------------------------------ events
    def advance(self, step: int, policy_fn: Callable[[], Any], force: bool = False, update: bool = False) -> None:
        """Called with the number of steps done; evaluates/checkpoints when their turn has come.

        force: take a point now (the caller knows its policy just changed: a rollout round).
        update: the policy has just changed (an SB3 update); with `eval_every = auto` points
        are taken only then, when due and affordable. A fixed `eval_every` ignores `update`.
        """
        self.bar.n = min(step, self.steps)
        self.bar.refresh()
        if self.auto_eval and not (force or update):
            return  # an unchanged policy: nothing new to measure or save
        policy = None
        train_cpu = self.train_cpu_seconds() if self._cpu_every else 0.0
        due = step >= self._next_eval or (self._cpu_every > 0 and train_cpu >= self._next_eval_cpu)
        if force or (due and not self.auto_eval):
            take = True
        elif due:
            take = self.affordable(step, reserve=1)  # keep room for the final point
        else:
            take = False
        if take:
            with training_rng_untouched():
                policy = policy if policy is not None else policy_fn()
                self.record(step, policy)
            while self._next_eval <= step:
                self._next_eval += self.eval_every
            while self._cpu_every and self._next_eval_cpu <= train_cpu:
                self._next_eval_cpu += self._cpu_every
        if self._next_ckpt is not None and (step >= self._next_ckpt) and self.out is not None:
            with training_rng_untouched():
                policy = policy if policy is not None else policy_fn()
                policy.save(self.out / "checkpoints" / f"step_{step:010d}")
            while self._next_ckpt <= step:
                self._next_ckpt += self.checkpoint_every

    def finish(self, step: int, policy: Any) -> None:
        """The final policy's point, when the curve does not end with it already.

        With `eval_every = auto` a run whose curve is still empty takes it only when affordable
        (a run too short for that gets its final measurement as its one row, `from_measurement`);
        when there are earlier points it is always taken, since the best point is chosen among
        them and the final policy.
        """
        if self.rows and self.rows[-1]["step"] == step:
            return
        if self.auto_eval and not self.rows and not self.affordable(step):
            return
        self.record(step, policy)

    def record(self, step: int, policy: Any) -> dict[str, Any]:
        with one_torch_thread():
            return self._record(step, policy)

    def simulated(self, policy: Any) -> Any:
        """The curve's simulation of `policy`: the same common random numbers (`eval_seed`) each time."""
        s = self.settings
        with one_torch_thread():
            return simulate(self.spec, policy.act, replications=s.eval_replications, periods=s.eval_periods,
                            warmup=s.eval_warmup, seed=s.eval_seed)

    def simulated_cost(self, policy: Any) -> float:
        """`simulated(policy).cost` for a caller outside a point (the rollout agent's judge);
        its CPU counts as the curve's."""
        c0 = time.process_time()
        cost = float(self.simulated(policy).cost)
        self.eval_cpu += time.process_time() - c0
        return cost

    def _record(self, step: int, policy: Any) -> dict[str, Any]:
        c0 = time.process_time()
        exact = self._exact(policy)
        # An exact cost makes the point's simulation redundant (on small chains it costs 20 to
        # 100 times the exact evaluation). It is simulated only when some point has no exact cost,
        # and from then on every point is compared on the simulation.
        c1 = time.process_time()
        est = None if (exact is not None and self._all_exact) else self.simulated(policy)
        sim_cpu = time.process_time() - c1
        self.last_simulated = None if est is None else float(est.cost)
        cost = exact if est is None else float(est.cost)
        gap = 100.0 * (cost - self.optimum) / self.optimum if self.optimum else None
        exact_gap = 100.0 * (exact - self.optimum) / self.optimum if (self.optimum and exact is not None) else None
        row = {"step": step, "wall_seconds": round(self.wall_seconds(), 3), "cpu_seconds": round(self.cpu_seconds(), 3),
               "cost": cost, "ci_halfwidth": 0.0 if est is None else float(est.ci_halfwidth), "gap_pct": gap,
               "exact_cost": exact, "exact_gap_pct": exact_gap}
        if est is None:
            key = exact
        else:
            if self._all_exact and self.best is not None:  # the first point without an exact cost:
                self.best = (float(self.simulated(self.best[1]).cost), self.best[1])  # the best so far, simulated
            self._all_exact = False
            key = float(est.cost)
        cpu = time.process_time() - c0
        self.eval_cpu += cpu
        # what the next point will cost: this one's while exact evaluations succeed; once one has
        # failed (it can take seconds, and is not tried again) about one simulation
        self._point_cpu = cpu if est is None else sim_cpu
        row["eval_cpu_seconds"] = max(round(cpu, 4), 1e-4)  # > 0: marks a point (not the final measurement)
        self.rows.append(row)
        if self.best is None or key < self.best[0]:
            self.best = (key, policy)
        self.bar.set_postfix(cost=f"{cost:.3f}", **({"gap": f"{gap:.2f}%"} if gap is not None else {}))
        if self.out is not None:
            self._write_curve()
        if self._tb is not None:
            self._tb.add_scalar("eval/cost", cost, step)
            if gap is not None:
                self._tb.add_scalar("eval/gap_pct", gap, step)
        return row

    _all_exact = True
    _exact_too_big = False
    _confirm_too_big = False
    _point_cpu = 0.0
    last_simulated: float | None = None  # the last point's simulated cost (None: it had only an exact one)

    def confirm_exact(self, policy: Any) -> float | None:
        """Exact cost for the rollout agent's judge, which asks on a win by simulation alone (see
        `rollout_judge.Judge.beats`), also after the curve has stopped exact evaluations: one
        large chain says nothing of the next. After one refusal it is not tried again (a refusal
        can take seconds). Its CPU counts as the curve's."""
        c0 = time.process_time()
        with one_torch_thread():
            cost = self._exact(policy, "_confirm_too_big")
        self.eval_cpu += time.process_time() - c0
        return cost

    def _exact(self, policy: Any, refused: str = "_exact_too_big") -> float | None:
        """Exact cost of the point when the policy's chain is small enough; None otherwise.

        After one point's chain has exceeded the state budget, later points are simulated only:
        finding that out again costs seconds each time (a three-stage serial chain: about 10 s
        to reach 200,000 states), and the best point is then chosen on the simulation anyway.
        `refused` names the flag that remembers a refusal (the judge's confirmations keep their own).
        """
        if not self.settings.curve_exact or getattr(self, refused):
            return None
        try:
            from invbench.baselines.policy_eval import evaluate_exact
        except ImportError:
            return None
        from invbench.envs.errors import BudgetError
        try:
            return float(evaluate_exact(self.spec, policy, max_states=self.settings.curve_exact_max_states,
                                        max_work=CURVE_EXACT_WORK).cost)
        except BudgetError:
            setattr(self, refused, True)
            return None

    def _write_curve(self) -> None:
        buf = io.StringIO()
        w = csv.DictWriter(buf, fieldnames=CURVE_COLUMNS, lineterminator="\n")
        w.writeheader()
        for r in self.rows:
            w.writerow({k: ("" if r[k] is None else r[k]) for k in CURVE_COLUMNS})
        self.out.mkdir(parents=True, exist_ok=True)
        _atomic_write(self.out / CURVE_FILE, buf.getvalue().encode())

    def from_measurement(self, step: int, measured: dict[str, Any]) -> None:
        """The curve's one row of a run too short for an affordable point: its final measurement
        (done anyway, so it costs the curve nothing; exact when the chain is small)."""
        gap = measured.get("gap")
        exact = measured["cost"] if measured.get("method") == "exact" else None
        row = {"step": step, "wall_seconds": round(self.wall_seconds(), 3), "cpu_seconds": round(self.cpu_seconds(), 3),
               "cost": measured["cost"], "ci_halfwidth": measured.get("ci_halfwidth") or 0.0,
               "gap_pct": None if gap is None else 100.0 * gap, "exact_cost": exact,
               "exact_gap_pct": None if (gap is None or exact is None) else 100.0 * gap, "eval_cpu_seconds": 0.0}
        self.rows.append(row)
        if self.out is not None:
            self._write_curve()

    def close(self) -> None:
        self.bar.close()
        if self._tb is not None:
            self._tb.close()


@contextmanager
def one_torch_thread() -> Iterator[None]:
    """Run a policy's many small forward passes (simulation, exact evaluation) on one torch thread.

    A batch of a few dozen states through a [64, 64] network is far too small to share: with two
    threads, torch's workers spin between the passes, and on a busy machine a learning-curve
    point took 17 CPU-seconds instead of 0.2 (measured on the 2-core development machine).
    """
    before = torch.get_num_threads()
    torch.set_num_threads(1)
    try:
        yield
    finally:
        torch.set_num_threads(before)


@contextmanager
def training_rng_untouched() -> Iterator[None]:
    """Run evaluation or a checkpoint without moving the training's random generators.

    Evaluation has its own generators (the CRN simulator's seed); this fence guarantees that
    nothing it calls draws from torch's, numpy's or Python's global generator that the agent
    trains with, so a seed gives the same policy whatever the curve and checkpoint settings.
    """
    torch_state, np_state, py_state = torch.get_rng_state(), np.random.get_state(), random.getstate()
    try:
        yield
    finally:
        torch.set_rng_state(torch_state)
        np.random.set_state(np_state)
        random.setstate(py_state)


def _tensorboard(out: Path) -> Any:
    """A TensorBoard writer when the tensorboard package is installed, else None."""
    if os.environ.get("INVBENCH_NO_TENSORBOARD"):
        return None
    try:
        from torch.utils.tensorboard import SummaryWriter
    except ImportError:
        return None
    return SummaryWriter(log_dir=str(out / "tensorboard"))


def sb3_callback(monitor: TrainingMonitor, policy_fn: Callable[[], Any]) -> Any:
    """An SB3 `BaseCallback` that feeds `monitor` and stops at the step or CPU budget."""
    from stable_baselines3.common.callbacks import BaseCallback

    class _Callback(BaseCallback):
        def _on_rollout_start(self) -> None:
            # a rollout starts after the previous one's update (`train()`), so the policy has
            # changed here, except at the first one and before an off-policy agent's learning starts
            n = self.num_timesteps
            if n > 0 and n > int(getattr(self.model, "learning_starts", 0)):
                monitor.advance(n, policy_fn, update=True)

        def _on_step(self) -> bool:
            monitor.advance(self.num_timesteps, policy_fn)
            self._progress_by_cpu()
            return not monitor.out_of_time()

        def _progress_by_cpu(self) -> None:
            # SB3's schedules (DQN's epsilon decay over `exploration_fraction` of the run) follow
            # num_timesteps / total_timesteps. When the CPU budget will end the run first (the
            # bench asks for a near-endless step count), count progress in CPU instead, or epsilon
            # would stay near 1 to the end. Off-policy SB3 reads `_total_timesteps` right after
            # this callback; on-policy learning uses its own copy (PPO/A2C schedules are constant).
            budget, n = monitor.max_cpu_seconds, self.num_timesteps
            if budget <= 0 or n <= 0:
                return
            done = max(n / monitor.steps, min(monitor.cpu_seconds() / budget, 1.0))
            self.model._total_timesteps = max(int(n / done), n) if done > 0 else monitor.steps

    return _Callback()
