"""Benchmark: how exact-solver time and memory grow with the size of each model (lead time for
lost sales and backorders, shelf life for perishable goods, stages for the serial chain), and
simulator time with the number of replications. The solver's size estimate refuses work over
the memory budget before building anything; the refusal is printed. A series stops after a
solve of more than a minute (the next size would take many).
Run: .venv/bin/python experiments/perf/scaling.py [--with-l6]   (lost sales L = 6 takes minutes;
experiments/perf/exact_targets.py --with-l6 runs it against its targets)
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from _common import classic_spec, machine, peak_memory  # noqa: E402

import numpy as np  # noqa: E402

from invbench import load_spec, solve  # noqa: E402
from invbench.envs.errors import BudgetError  # noqa: E402
from invbench.experiments.simulate import simulate  # noqa: E402

#: A series stops after a solve longer than this (seconds).
LONG = 60.0


def available_mb() -> float:
    """MemAvailable from /proc/meminfo: the budget is what this machine can give right now."""
    with open("/proc/meminfo") as f:
        for line in f:
            if line.startswith("MemAvailable:"):
                return int(line.split()[1]) / 1024
    return 2048.0


MEMORY_BUDGET_MB = 0.8 * available_mb()


_BASE = {"holding_cost": 1.0, "shortage_cost": 9.0, "demand": {"distribution": "poisson", "mean": 5.0}}

#: model -> builder of the instance of size `size` in its series (Poisson mean 5, h = 1, p = 9)
_BUILDERS = {
    "lost_sales": lambda size: classic_spec(size, 9),
    # shelf life m, lead time 1, FIFO, outdating cost 3
    "perishable": lambda size: load_spec({"model": "perishable", "lead_time": 1, "shelf_life": size,
                                          "outdating_cost": 3.0, **_BASE}),
    # N stages, lead time 1 each, holding cost falling upstream
    "serial": lambda size: load_spec({"model": "serial", "lead_times": [1] * size, "shortage_cost": 9.0,
                                      "holding_costs": [1.0 / 2**i for i in range(size)],
                                      "demand": _BASE["demand"]}),
    "backorder": lambda size: load_spec({"model": "backorder", "lead_time": size, **_BASE}),
}


def instance(model: str, size: int):
    """The instance of size `size` in each series (Poisson mean 5, h = 1, p = 9)."""
    return _BUILDERS[model](size)


#: (title, model, sizes, solve keywords, label of the size, sizes skipped unless --with-l6 (minutes))
SERIES = [
    ("lost sales (matrix-free)", "lost_sales", range(1, 8), {}, "L", {6}),
    ("backorders, inventory-position state (matrix-free)", "backorder", (1, 2, 4, 8, 16), {}, "L", set()),
    ("backorders, full pipeline state (matrix-free)", "backorder", range(1, 5), {"full_pipeline": True}, "L", set()),
    ("perishable, lead time 1 (transition matrix)", "perishable", range(2, 8), {}, "m", set()),
    ("serial chain (Clark-Scarf decomposition)", "serial", range(2, 7), {}, "N", set()),
]


def solver_tables(with_l6: bool) -> None:
    print(f"solver, Poisson mean 5, h = 1, p = 9; memory budget {MEMORY_BUDGET_MB:,.0f} MiB (80% of MemAvailable); "
          "peak = Python-heap peak (tracemalloc) inside the solve")
    for title, model, sizes, kw, label, slow in SERIES:
        print(title)
        print(f"  {label:>2} {'states':>11} {'pairs':>12} {'iters':>5} {'seconds':>8} {'peak MiB':>8} {'cost':>9}")
        for size in sizes:
            if size in slow and not with_l6:
                print(f"  {size:>2} skipped (minutes; run with --with-l6)")
                continue
            spec = instance(model, size)
            try:
                with peak_memory() as mem:
                    t0 = time.perf_counter()
                    res = solve(spec, max_memory_mb=MEMORY_BUDGET_MB, max_states=10**9, **kw)
                    dt = time.perf_counter() - t0
            except BudgetError as e:
                print(f"  {size:>2} refused: {e}")
                break
            print(f"  {size:>2} {res.states:>11,} {res.pairs:>12,} {res.iterations:>5} {dt:>8.2f} {mem['mib']:>8.0f} "
                  f"{res.cost:>9.4f}")
            if dt > LONG:
                print(f"  stopped after {dt:.0f} s")
                break


def main() -> None:
    print(f"machine: {machine()}")
    solve(classic_spec(2, 9))  # warm-up: imports and the compiled loops
    solver_tables("--with-l6" in sys.argv)
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
