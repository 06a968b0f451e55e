"""Benchmark: the rollout agent's simulated periods per CPU-second, numpy path against the
compiled path (`agents/rollout_kernels.py`), and the optimality gap each reaches per CPU-minute.

Part 1, side by side on classic-grid instances (lost sales, Poisson mean 5, h = 1): one round of
the agent's simulations (`sample_states` + `rollout_q`, default settings except the states
labelled) with its start rule (order-up-to) and with a trained network as the current policy;
periods per CPU-second of this process, best of two interleaved rounds. The numpy path is
forced with INVBENCH_ROLLOUT_NUMPY=1. Target: compiled >= 3 x numpy.

Part 2: `train(..., max_cpu_seconds=60)` both ways on a few instances, the exact optimum by the
solver, the gap of the exported policy (its exact cost), periods simulated per CPU-second of
the whole run (network fitting included) and rounds done.

    .venv/bin/python experiments/perf/rollout_speed.py [--cpu-seconds 60] [--quick]
"""
from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from _common import classic_spec, machine  # noqa: E402

import numpy as np  # noqa: E402
import torch  # noqa: E402

from invbench.agents import rollout_kernels, train  # noqa: E402
from invbench.agents.rollout_agent import RolloutSettings, best_order_up_to, rollout_q, sample_states  # noqa: E402
from invbench.agents.scaling import scaling_for  # noqa: E402

SPEED = [(1, 4), (2, 9), (4, 39)]
QUALITY = [(2, 9), (4, 39)]
STATES = 300


class numpy_path:
    """Within the block the rollout agent runs its numpy path."""

    def __enter__(self) -> None:
        os.environ[rollout_kernels.NUMPY_ENV] = "1"

    def __exit__(self, *exc: object) -> None:
        os.environ.pop(rollout_kernels.NUMPY_ENV, None)


def one_round(spec, act, sizes, horizon: int) -> tuple[int, float]:
    """Periods simulated by one round of the agent's simulations, and the CPU seconds it took."""
    s = RolloutSettings(states_per_iteration=STATES)
    rng = np.random.default_rng(0)
    t = time.process_time()
    states, n = sample_states(spec, act, s, rng)
    q = rollout_q(spec, act, states, sizes, s.rollouts, horizon, rng)
    return n + q.size * s.rollouts * (horizon + 1), time.process_time() - t


def speed(L: int, p: float) -> None:
    spec = classic_spec(L, p)
    quick = train(spec, "rollout", steps=10**12, seed=0, optimum=None, select_best=False,
                  settings={"threads": 1, "progress": False, "iterations": 1, "states_per_iteration": 300,
                            "eval_replications": 4, "eval_periods": 50, "eval_warmup": 10})
    scaling = scaling_for(spec, RolloutSettings())
    _, start = best_order_up_to(spec, scaling.max_order_units, 0)
    horizon = 8 * (L + 1) + 16
    for label, act in (("order-up-to start", start), ("trained network", quick.policy.act)):
        one_round(spec, act, scaling.order_sizes_units, 2)  # compile (numba caches it on disk) outside the timing
        best = {"numpy": 0.0, "compiled": 0.0}
        for _ in range(2):
            with numpy_path():
                n, sec = one_round(spec, act, scaling.order_sizes_units, horizon)
            best["numpy"] = max(best["numpy"], n / sec)
            n, sec = one_round(spec, act, scaling.order_sizes_units, horizon)
            best["compiled"] = max(best["compiled"], n / sec)
        print(f"L={L} p={p:<3g} {label:<18} {n:>11,d} {best['numpy']:>14,.0f} {best['compiled']:>14,.0f} "
              f"{best['compiled'] / best['numpy']:>7.1f} x", flush=True)


def quality(L: int, p: float, cpu: float) -> None:
    from invbench.baselines.exact import solve
    spec = classic_spec(L, p)
    opt = solve(spec)
    settings = {"threads": 1, "progress": False, "iterations": 1000}
    row = {}
    for way in ("numpy", "compiled"):
        if way == "numpy":
            with numpy_path():
                res = train(spec, "rollout", steps=10**12, seed=0, optimum=opt, settings=settings, max_cpu_seconds=cpu)
        else:
            res = train(spec, "rollout", steps=10**12, seed=0, optimum=opt, settings=settings, max_cpu_seconds=cpu)
        row[way] = res
        print(f"L={L} p={p:<3g} {way:<9} cpu {res.cpu_seconds:6.1f} s  curve points {len(res.curve):>3} "
              f"periods {res.steps_done:>13,d}  per CPU-s {res.steps_done / res.cpu_seconds:>12,.0f}  "
              f"cost {res.cost:8.4f}  optimum {opt.cost:8.4f}  gap {100 * res.gap:6.2f} %", flush=True)
    rate = {w: res.steps_done / res.cpu_seconds for w, res in row.items()}
    r = rate["compiled"] / rate["numpy"]
    print(f"L={L} p={p:<3g} periods per CPU-second compiled / numpy: {r:.1f} x; gap numpy "
          f"{100 * row['numpy'].gap:.2f} % -> compiled {100 * row['compiled'].gap:.2f} %", flush=True)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cpu-seconds", type=float, default=60.0, help="CPU budget of each training run (part 2)")
    ap.add_argument("--quick", action="store_true", help="part 1 only")
    a = ap.parse_args()
    torch.set_num_threads(1)
    print(f"machine: {machine()}; load average {os.getloadavg()[0]:.1f} {os.getloadavg()[1]:.1f}")
    print(f"part 1: one round ({STATES} states, 32 paths, default horizon), periods per CPU-second")
    print(f"{'instance':<10} {'policy':<18} {'periods':>11} {'numpy':>14} {'compiled':>14} {'ratio':>9}")
    for L, p in SPEED:
        speed(L, p)
    if not a.quick:
        print(f"part 2: train with max_cpu_seconds={a.cpu_seconds:g} (iterations up to 1000, seed 0), exact gap")
        for L, p in QUALITY:
            quality(L, p, a.cpu_seconds)
    print(f"load average after: {os.getloadavg()[0]:.1f} {os.getloadavg()[1]:.1f}; {machine()}")


if __name__ == "__main__":
    main()
