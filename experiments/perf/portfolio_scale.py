"""Benchmark: a whole portfolio of invented items (default 1,000) through `run_portfolio` on this
machine — the choice stage (optimum + classical policies per item) and the robustness stage —
printing the seconds of each stage, the total and the time per item.

The items are invented (lost sales, lead time 1-3, Poisson or negative-binomial daily demand of
mean 0.5-6, a year of uncensored daily sales each), drawn from a fixed seed.
    .venv/bin/python experiments/perf/portfolio_scale.py [--items N] [--bootstrap R] [--workers W] [--keep DIR]
"""
from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

import numpy as np


def invent(n: int, days: int, seed: int) -> tuple[list, dict]:
    """n invented items and their daily sales histories."""
    from invbench.envs.spec import spec_from_dict
    from invbench.fitting.reading import ItemHistory
    from invbench.portfolio.items import PortfolioItem

    rng = np.random.default_rng(seed)
    items, hist = [], {}
    for k in range(n):
        name = f"part-{k:05d}"
        mean = float(rng.uniform(0.5, 6.0))
        if rng.random() < 0.5:
            law = {"distribution": "poisson", "mean": round(mean, 3)}
            units = rng.poisson(mean, size=days)
        else:
            var = mean * float(rng.uniform(1.3, 3.0))
            law = {"distribution": "negative_binomial", "mean": round(mean, 3), "variance": round(var, 3)}
            size = mean**2 / (var - mean)
            units = rng.negative_binomial(size, size / (size + mean), size=days)
        h = float(rng.choice([0.01, 0.02, 0.05]))
        spec = spec_from_dict({"name": name, "model": "lost_sales", "lead_time": int(rng.integers(1, 4)),
                               "holding_cost": h, "shortage_cost": round(h * float(rng.uniform(20, 150)), 4),
                               "demand": law})
        items.append(PortfolioItem(name, spec, "invented"))
        hist[name] = ItemHistory(name, np.arange(days), units.astype(np.int64), np.zeros(days, dtype=bool))
    return items, hist


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--items", type=int, default=1000)
    ap.add_argument("--bootstrap", type=int, default=2)
    ap.add_argument("--workers", type=int, default=os.cpu_count() or 1)
    ap.add_argument("--days", type=int, default=365)
    ap.add_argument("--keep", default=None, help="results folder to keep (default: a temporary one)")
    a = ap.parse_args()
    from invbench.portfolio.run import run_portfolio
    from invbench.portfolio.summary import summary_lines

    t0 = time.perf_counter()
    items, hist = invent(a.items, a.days, seed=0)
    t_inv = time.perf_counter() - t0
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(a.keep or tmp) / "run"
        t1 = time.perf_counter()
        res = run_portfolio(items, out, histories=hist, name=f"perf-{a.items}", replicates=a.bootstrap,
                            workers=a.workers, progress=sys.stderr.isatty(), command=sys.argv)
        total = time.perf_counter() - t1
        for line in summary_lines(res):
            print(line)
    print()
    print(f"machine: {os.cpu_count()} CPUs, {a.workers} workers (local process pool)")
    print(f"items: {a.items} invented (made in {t_inv:.1f}s), bootstrap {a.bootstrap}")
    for stage, d in res.stages.items():
        print(f"stage {stage:10s}: {d['cells']:6d} cells in {d['seconds']:8.1f}s "
              f"({d['seconds'] / max(d['cells'], 1):.3f}s per cell, {d['seconds'] / a.items:.3f}s per item)")
    print(f"total: {total:.1f}s for {a.items} items = {total / a.items:.3f}s per item (wall clock); "
          f"failed cells: {len(res.failed)}")


if __name__ == "__main__":
    main()
