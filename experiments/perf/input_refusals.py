"""How fast impossible input is refused (target: under 2 s each, before memory is allocated).

Each case runs `invbench` in a fresh process, as a user would, and prints its exit code, wall
time and peak memory (max RSS, which includes the ~150 MiB of imports). Run:
    .venv/bin/python experiments/perf/input_refusals.py
"""
from __future__ import annotations

import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

BASE = """[instance]
model = "lost_sales"
lead_time = 1
shortage_cost = 9.0
[instance.demand]
{demand}
"""
CASES = [
    ("poisson mean 1e9", 'distribution = "poisson"\nmean = 1e9', ["solve"]),
    ("normal mean 1e8", 'distribution = "normal"\nmean = 1e8\nstd = 1.0', ["solve"]),
    ("uniform up to 1e12", 'distribution = "uniform"\nlow = 0\nhigh = 1000000000000', ["solve"]),
    ("counts [1, 1e13]", 'distribution = "empirical"\ncounts = [1, 1e13]', ["solve"]),
    ("binomial n = 1e11", 'distribution = "binomial"\nn = 100000000000\np = 0.5', ["solve"]),
    ("geometric mean 1e-300", 'distribution = "geometric"\nmean = 1e-300', ["solve"]),
    ("--periods 1e12", 'distribution = "poisson"\nmean = 3.0',
     ["evaluate", "--policy", "base_stock", "--simulate", "--periods", "1e12"]),
    ("--replications 1e9", 'distribution = "poisson"\nmean = 3.0', ["evaluate", "--policy", "base_stock",
                                                                     "--replications", "1e9"]),
]


def main() -> int:
    print(f"machine: {os.uname().machine}, {os.cpu_count()} cores, python {sys.version.split()[0]}")
    print(f"{'case':24s} {'exit':>4s} {'seconds':>8s} {'max RSS MiB':>12s}  message")
    with tempfile.TemporaryDirectory() as tmp:
        for name, demand, args in CASES:
            spec = Path(tmp) / "spec.toml"
            spec.write_text(BASE.format(demand=demand))
            before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
            t0 = time.perf_counter()
            p = subprocess.run([sys.executable, "-m", "invbench", args[0], str(spec), *args[1:]],
                               capture_output=True, text=True, timeout=600)
            secs = time.perf_counter() - t0
            rss = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss  # max over children so far
            rss_txt = f"{rss / 1024:12.0f}" if rss > before else f"{'<=' + format(before / 1024, '.0f'):>12s}"
            msg = p.stderr.strip().splitlines()[-1][:90] if p.stderr.strip() else ""
            print(f"{name:24s} {p.returncode:4d} {secs:8.2f} {rss_txt}  {msg}")
    _in_process()
    return 0


def _in_process() -> None:
    """The refusal alone, without the process start-up and imports that dominate the above."""
    import tomllib

    from invbench.envs.demand import Demand
    from invbench.envs.errors import BudgetError, SpecError
    print("\nin process (Demand.from_dict only):")
    for name, demand, _ in CASES[:6]:
        t0 = time.perf_counter()
        try:
            Demand.from_dict(tomllib.loads(demand))
            outcome = "accepted"
        except (SpecError, BudgetError) as e:
            outcome = type(e).__name__
        print(f"{name:24s} {1000 * (time.perf_counter() - t0):8.2f} ms  {outcome}")


if __name__ == "__main__":
    sys.exit(main())
