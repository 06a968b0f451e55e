"""Benchmark: exact solve and exact policy evaluation on the 16 classic lost-sales instances.

Prints states, iterations, seconds and peak memory per instance and the totals.
Run: .venv/bin/python experiments/perf/dp_grid.py
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from _common import CLASSIC, classic_spec, machine, peak_memory  # noqa: E402

from invbench import solve  # noqa: E402
from invbench.baselines.policy_eval import evaluate_exact  # noqa: E402


def main() -> None:
    solve(classic_spec(1, 4))  # warm the imports
    print(f"machine: {machine()}")
    print(f"{'L':>2} {'p':>3} {'states':>8} {'iters':>5} {'solve s':>8} {'peak MiB':>8} {'cost':>9} "
          f"{'eval s':>7} {'eval states':>11}")
    tot_solve = tot_eval = 0.0
    peak = 0.0
    worst = (0.0, None)
    for L, p in CLASSIC:
        spec = classic_spec(L, p)
        with peak_memory() as mem:
            t0 = time.perf_counter()
            res = solve(spec)
            dt = time.perf_counter() - t0
        t0 = time.perf_counter()
        ev = evaluate_exact(spec, res.policy)
        de = time.perf_counter() - t0
        tot_solve += dt
        tot_eval += de
        peak = max(peak, mem["mib"])
        worst = max(worst, (dt, (L, p)))
        print(f"{L:>2} {p:>3} {res.states:>8,} {res.iterations:>5} {dt:>8.3f} {mem['mib']:>8.0f} {res.cost:>9.4f} "
              f"{de:>7.3f} {ev.states:>11,}")
    print(f"total solve {tot_solve:.2f} s (target <= 4), largest {worst[0]:.2f} s at L,p={worst[1]} "
          f"(target <= 1), peak memory {peak:.0f} MiB (target <= 2048); total exact evaluation of the "
          f"optimal policies {tot_eval:.2f} s")
    print(f"after run: {machine()}")


if __name__ == "__main__":
    main()
