"""Benchmark: how solver time and memory grow with the lead time, and simulator time with the
number of replications. The solver's size estimate refuses lead times over the memory budget
before building anything; the refusal is printed.
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from _common import classic_spec, machine, peak_memory  # noqa: E402

import numpy as np  # noqa: E402

from invbench import solve  # noqa: E402
from invbench.envs.errors import BudgetError  # noqa: E402
from invbench.experiments.simulate import simulate  # noqa: E402



def available_mb() -> float:
    """MemAvailable from /proc/meminfo: the budget is what this machine can give right now."""
    with open("/proc/meminfo") as f:
        for line in f:
            if line.startswith("MemAvailable:"):
                return int(line.split()[1]) / 1024
    return 2048.0


MEMORY_BUDGET_MB = 0.8 * available_mb()


def main() -> None:
    print(f"machine: {machine()}")
    print(f"solver, Poisson mean 5, p = 9, memory budget {MEMORY_BUDGET_MB:,.0f} MiB (80% of MemAvailable)")
    print(f"{'L':>2} {'states':>10} {'pairs':>11} {'iters':>5} {'seconds':>8} {'peak MiB':>8} {'cost':>9}")
    for L in range(1, 8):
        spec = classic_spec(L, 9)
        try:
            with peak_memory() as mem:
                t0 = time.perf_counter()
                res = solve(spec, max_memory_mb=MEMORY_BUDGET_MB, max_states=10**8)
                dt = time.perf_counter() - t0
        except BudgetError as e:
            print(f"{L:>2} refused: {e}")
            break
        print(f"{L:>2} {res.states:>10,} {res.pairs:>11,} {res.iterations:>5} {dt:>8.2f} {mem['mib']:>8.0f} "
              f"{res.cost:>9.4f}")
    print("batch simulator, L = 4, base-stock 31, 500 periods")
    spec = classic_spec(4, 9)
    pol = lambda obs: np.maximum(31 - obs.sum(axis=1), 0)  # noqa: E731
    for reps in (10, 100, 1000, 10_000):
        t0 = time.perf_counter()
        simulate(spec, pol, replications=reps, periods=500, warmup=0)
        dt = time.perf_counter() - t0
        print(f"  {reps:>6} replications: {dt:7.3f} s, {reps * 500 / dt:>12,.0f} period-steps/s")


if __name__ == "__main__":
    main()
