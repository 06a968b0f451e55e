"""Shared bits of the performance benchmarks: one-core setup, classic grid, memory probe."""
from __future__ import annotations

import os

# One core, so figures compare like with like on a shared 2-core machine.
for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(var, "1")

import platform  # noqa: E402
import resource  # noqa: E402
import tracemalloc  # noqa: E402
from contextlib import contextmanager  # noqa: E402
from typing import Iterator  # noqa: E402

import invbench  # noqa: E402

CLASSIC = [(L, p) for L in (1, 2, 3, 4) for p in (4, 9, 19, 39)]


def classic_spec(L: int, p: float) -> invbench.InstanceSpec:
    """The literature's lost-sales grid: Poisson mean 5, h = 1 (Zipkin 2008)."""
    return invbench.load_spec({"model": "lost_sales", "lead_time": L, "holding_cost": 1.0, "shortage_cost": p,
                               "demand": {"distribution": "poisson", "mean": 5.0}})


@contextmanager
def peak_memory() -> Iterator[dict]:
    """Peak Python-heap allocation (numpy included) inside the block, in MiB."""
    out: dict = {}
    tracemalloc.start()
    try:
        yield out
    finally:
        out["mib"] = tracemalloc.get_traced_memory()[1] / 2**20
        tracemalloc.stop()


def machine() -> str:
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return (f"{platform.machine()} {platform.processor() or ''} {os.cpu_count()} cores, "
            f"python {platform.python_version()}, numpy {__import__('numpy').__version__}, "
            f"process max RSS so far {rss:.0f} MiB").replace("  ", " ")
