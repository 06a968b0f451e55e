"""What happens while an agent trains: progress bar, learning curve, checkpoints, time budget.

`TrainingMonitor` is agent-agnostic (our rollout agent calls it directly); `SB3Callback` adapts
it to stable-baselines3. Every K steps the current greedy policy is measured with common random
numbers (the same demands each time, so the curve's wiggles are the policy's, not the noise's)
and, when its reachable chain is small enough, exactly; a row goes to `learning_curve.csv`, with
the gap to the optimum when that is known.
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
                 "exact_gap_pct")


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
        self.eval_every = resolve_every(settings.eval_every, steps, 20)
        self.checkpoint_every = resolve_every(settings.checkpoint_every, steps, 5)
        self.max_cpu_seconds = max_cpu_seconds
        self.rows: list[dict[str, Any]] = []
        self.best: tuple[float, Any] | None = None
        self._next_eval = self.eval_every
        self._next_ckpt = self.checkpoint_every if self.checkpoint_every > 0 else None
        self._t0, self._c0 = time.perf_counter(), time.process_time()
        self.bar = tqdm(total=steps, unit="step", disable=not settings.progress, dynamic_ncols=True, leave=False)
        self._tb = _tensorboard(out) if out is not None else None

    # ------------------------------------------------------------------ timing
    def cpu_seconds(self) -> float:
        return time.process_time() - self._c0

    def wall_seconds(self) -> float:
        return time.perf_counter() - self._t0

    def out_of_time(self) -> bool:
        return self.max_cpu_seconds > 0 and self.cpu_seconds() >= self.max_cpu_seconds

    # ------------------------------------------------------------------ events
    def advance(self, step: int, policy_fn: Callable[[], Any], force: bool = False) -> None:
        """Called with the number of steps done; evaluates/checkpoints when their turn has come."""
        self.bar.n = min(step, self.steps)
        self.bar.refresh()
        policy = None
        if force or step >= self._next_eval:
            with training_rng_untouched():
                policy = policy_fn()
                self.record(step, policy)
            while self._next_eval <= step:
                self._next_eval += self.eval_every
        if self._next_ckpt is not None and (step >= self._next_ckpt) and self.out is not None:
            with training_rng_untouched():
                policy = policy if policy is not None else policy_fn()
                policy.save(self.out / "checkpoints" / f"step_{step:010d}")
            while self._next_ckpt <= step:
                self._next_ckpt += self.checkpoint_every

    def record(self, step: int, policy: Any) -> dict[str, Any]:
        s = self.settings
        est = simulate(self.spec, policy.act, replications=s.eval_replications, periods=s.eval_periods,
                       warmup=s.eval_warmup, seed=s.eval_seed)
        gap = 100.0 * (est.cost - self.optimum) / self.optimum if self.optimum else None
        exact = self._exact(policy)
        exact_gap = 100.0 * (exact - self.optimum) / self.optimum if (self.optimum and exact is not None) else None
        row = {"step": step, "wall_seconds": round(self.wall_seconds(), 3), "cpu_seconds": round(self.cpu_seconds(), 3),
               "cost": est.cost, "ci_halfwidth": float(est.ci_halfwidth), "gap_pct": gap, "exact_cost": exact,
               "exact_gap_pct": exact_gap}
        self.rows.append(row)
        # the best point is chosen on the exact cost when every point has one (no selection noise)
        key = exact if exact is not None and self._all_exact else est.cost
        if exact is None:
            self._all_exact = False
        if self.best is None or key < self.best[0]:
            self.best = (key, policy)
        self.bar.set_postfix(cost=f"{est.cost:.3f}", **({"gap": f"{gap:.2f}%"} if gap is not None else {}))
        if self.out is not None:
            self._write_curve()
        if self._tb is not None:
            self._tb.add_scalar("eval/cost", est.cost, step)
            if gap is not None:
                self._tb.add_scalar("eval/gap_pct", gap, step)
        return row

    _all_exact = True

    def _exact(self, policy: Any) -> float | None:
        """Exact cost of the point when the policy's chain is small enough; None otherwise."""
        if not self.settings.curve_exact:
            return None
        try:
            from invbench.baselines.policy_eval import evaluate_exact
        except ImportError:
            return None
        from invbench.envs.errors import BudgetError
        try:
            return float(evaluate_exact(self.spec, policy, max_states=self.settings.curve_exact_max_states).cost)
        except BudgetError:
            return None

    def _write_curve(self) -> None:
        buf = io.StringIO()
        w = csv.DictWriter(buf, fieldnames=CURVE_COLUMNS, lineterminator="\n")
        w.writeheader()
        for r in self.rows:
            w.writerow({k: ("" if r[k] is None else r[k]) for k in CURVE_COLUMNS})
        self.out.mkdir(parents=True, exist_ok=True)
        _atomic_write(self.out / CURVE_FILE, buf.getvalue().encode())

    def close(self) -> None:
        self.bar.close()
        if self._tb is not None:
            self._tb.close()


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
        def _on_step(self) -> bool:
            monitor.advance(self.num_timesteps, policy_fn)
            return not monitor.out_of_time()

    return _Callback()
