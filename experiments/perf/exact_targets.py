"""Benchmark: the exact solver past L = 5 against its targets, and the matrix-free path beside
the matrix path on the same instance.

Each solve runs in a fresh child process (after a tiny warm-up solve, which loads the compiled
loops from numba's cache), so its peak memory is the child's own peak RSS. Targets (issue:
performance): lost sales L = 5, p = 39 certified in <= 5 s and <= 1 GB; L = 6, p = 9 in
<= 10 minutes and <= 8 GB on this 2-core machine.
Run: .venv/bin/python experiments/perf/exact_targets.py [--with-l6]
"""
from __future__ import annotations

import json
import os
import resource
import subprocess
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from _common import classic_spec, machine  # noqa: E402

#: (L, p, fast, numba threads, target seconds, target MiB); None where there is no target. The
#: sweep shares its work among numba's threads (NUMBA_NUM_THREADS); one thread is shown beside
#: two, since on a busy shared machine the second thread may not help.
CASES = [(5, 39, True, 1, 5.0, 1024), (5, 39, True, 2, 5.0, 1024), (5, 9, True, 2, None, None),
         (5, 9, False, 2, None, None)]
L6 = (6, 9, True, 2, 600.0, 8192)


def one(L: int, p: float, fast: bool) -> dict:
    """Solve one classic instance in this process and report (run in a child)."""
    from invbench import solve
    solve(classic_spec(2, 9))  # warm-up: loads the compiled loops
    base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    t0, c0 = time.perf_counter(), time.process_time()
    res = solve(classic_spec(L, p), fast=fast, max_states=10**8, max_memory_mb=20_000)
    wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    return {"states": res.states, "pairs": res.pairs, "iterations": res.iterations, "wall": wall, "cpu": cpu,
            "rss": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, "base_rss": base,
            "cost": res.cost, "gap": res.gap, "path": type(res.mdp).__name__}


def run(L: int, p: float, fast: bool, threads: int) -> dict:
    env = {**os.environ, "NUMBA_NUM_THREADS": str(threads)}
    out = subprocess.run([sys.executable, __file__, "--one", str(L), str(p), str(int(fast))],
                         capture_output=True, text=True, check=True, env=env)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    cases = CASES + ([L6] if "--with-l6" in sys.argv else [])
    print(f"machine: {machine()}, load average {os.getloadavg()[0]:.1f}")
    print("lost sales, Poisson mean 5, h = 1; each solve in a fresh process after a warm-up; RSS = the "
          "child's peak resident memory (the warm-up process alone: base)")
    print(f"{'L':>2} {'p':>3} {'path':>9} {'thr':>3} {'states':>11} {'pairs':>12} {'iters':>5} {'wall s':>8} {'cpu s':>8} "
          f"{'peak MiB':>8} {'base':>5} {'cost':>9}  target")
    seen: dict = {}
    for L, p, fast, threads, t_s, t_mb in cases:
        r = run(L, p, fast, threads)
        seen[(L, p, fast)] = r
        target = ""
        if t_s is not None:
            ok = r["wall"] <= t_s and r["rss"] <= t_mb
            target = f"<= {t_s:g} s, <= {t_mb:,} MiB: {'met' if ok else 'NOT met'}"
        print(f"{L:>2} {p:>3} {'split' if fast else 'matrix':>9} {threads:>3} {r['states']:>11,} {r['pairs']:>12,} "
              f"{r['iterations']:>5} {r['wall']:>8.2f} {r['cpu']:>8.2f} {r['rss']:>8.0f} {r['base_rss']:>5.0f} "
              f"{r['cost']:>9.4f}  {target}")
    a, b = seen[(5, 9, True)], seen[(5, 9, False)]
    print(f"L = 5, p = 9: matrix / split = {b['wall'] / a['wall']:.1f} x the time (cpu {b['cpu'] / a['cpu']:.1f} x), "
          f"{(b['rss'] - b['base_rss']) / max(a['rss'] - a['base_rss'], 1):.1f} x the memory above base; "
          f"costs differ by {abs(a['cost'] - b['cost']):.1e}")


if __name__ == "__main__":
    if len(sys.argv) > 1 and sys.argv[1] == "--one":
        print(json.dumps(one(int(sys.argv[2]), float(sys.argv[3]), bool(int(sys.argv[4])))))
    else:
        main()
