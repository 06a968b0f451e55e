"""Writes the invented demo data of `invbench fit`: two years of daily sales with stock-outs at a
made-up bicycle-parts wholesaler (30 items), and an items file with lead times and costs.

Everything here is invented. A fixed seed makes the files identical, byte for byte, on every run:
    python -m invbench.fitting.make_demo_data [--out DIR]      (default: the package's data/ folder)
"""
from __future__ import annotations

import argparse
import csv
import datetime as dt
import io
from pathlib import Path

import numpy as np

SEED = 20240917
START = dt.date(2023, 1, 2)
DAYS = 730
SALES_FILE = "invented_bike_parts_sales.csv"
ITEMS_FILE = "invented_bike_parts_items.csv"

# name, demand law and its parameters, lead time (days), service level of the simulated
# order-up-to rule (lower = more stock-outs), holding cost per unit-day, shortage cost per unit lost
ITEMS: list[tuple[str, tuple, int, float, float, float]] = [
    ("chain-lube-100ml", ("poisson", 4.0), 1, 0.90, 0.01, 2.0),
    ("brake-pads-disc", ("negative_binomial", 3.0, 7.0), 2, 0.85, 0.02, 4.0),
    ("brake-pads-rim", ("poisson", 1.5), 2, 0.95, 0.01, 2.5),
    ("inner-tube-700x25", ("poisson", 9.0), 1, 0.80, 0.01, 1.5),
    ("inner-tube-26x2.1", ("poisson", 3.5), 2, 0.90, 0.01, 1.5),
    ("inner-tube-29x2.3", ("negative_binomial", 5.0, 9.0), 1, 0.75, 0.01, 1.5),
    ("tyre-700x28", ("negative_binomial", 2.0, 4.5), 3, 0.90, 0.05, 6.0),
    ("tyre-29x2.3", ("poisson", 1.2), 3, 0.92, 0.06, 7.0),
    ("tyre-lever-set", ("poisson", 2.5), 2, 0.97, 0.005, 0.8),
    ("patch-kit", ("poisson", 3.0), 2, 0.70, 0.005, 0.7),
    ("bar-tape", ("negative_binomial", 1.5, 3.5), 3, 0.88, 0.03, 3.0),
    ("bottle-cage", ("poisson", 2.0), 2, 0.93, 0.02, 2.0),
    ("water-bottle-750ml", ("negative_binomial", 6.0, 15.0), 1, 0.85, 0.01, 1.2),
    ("chain-11-speed", ("poisson", 1.8), 3, 0.90, 0.05, 5.0),
    ("chain-9-speed", ("poisson", 2.2), 2, 0.60, 0.03, 3.5),
    ("cassette-11-32", ("negative_binomial", 0.8, 1.6), 4, 0.90, 0.10, 9.0),
    ("brake-cable", ("poisson", 5.0), 1, 0.85, 0.002, 0.5),
    ("gear-cable", ("poisson", 4.5), 1, 0.88, 0.002, 0.5),
    ("cable-housing-1m", ("negative_binomial", 3.5, 12.0), 2, 0.80, 0.003, 0.6),
    ("grips", ("poisson", 1.0), 3, 0.95, 0.02, 2.2),
    ("saddle", ("negative_binomial", 0.7, 1.2), 4, 0.90, 0.08, 8.0),
    ("pedals-flat", ("poisson", 0.9), 3, 0.85, 0.05, 4.5),
    ("front-light", ("negative_binomial", 1.2, 2.8), 3, 0.75, 0.05, 5.0),
    ("rear-light", ("poisson", 1.6), 3, 0.55, 0.04, 4.0),
    ("bell", ("poisson", 2.8), 2, 0.96, 0.005, 0.6),
    # sold mostly as single caps, sometimes as a bag of 10: not Poisson-like at all
    ("valve-caps", ("packs", 0.45, 1, 10, 0.15), 2, 0.90, 0.001, 0.3),
    # workshops buy spokes in bundles of 12
    ("spoke-292mm", ("packs", 0.30, 12, 24, 0.25), 2, 0.85, 0.002, 0.4),
    ("quick-release-skewer", ("poisson", 0.6), 3, 0.90, 0.02, 2.0),
    ("derailleur-hanger", ("poisson", 0.4), 4, 0.50, 0.02, 3.0),
    ("multi-tool", ("negative_binomial", 1.0, 2.0), 3, 0.90, 0.03, 3.0),
]
#: Items listed in the catalogue only for the last days of the period (a new item: few data).
NEW_ITEMS = {"derailleur-hanger": 40}


def sample_demand(law: tuple, rng: np.random.Generator, n: int) -> np.ndarray:
    """n days of demand from an item's law."""
    kind = law[0]
    if kind == "poisson":
        return rng.poisson(law[1], n)
    if kind == "negative_binomial":
        mean, var = law[1], law[2]
        size = mean * mean / (var - mean)
        return rng.negative_binomial(size, size / (size + mean), n)
    if kind == "packs":
        # a day has an order with probability p_order; it is `small` units, or `big` with p_big
        p_order, small, big, p_big = law[1:]
        has = rng.random(n) < p_order
        size = np.where(rng.random(n) < p_big, big, small)
        return np.where(has, size, 0)
    raise ValueError(kind)


def simulate(law: tuple, lead: int, service: float, rng: np.random.Generator, days: int) -> tuple[np.ndarray, np.ndarray]:
    """Daily order-up-to rule with lost sales: returns (sales, stock-out flag) per day."""
    draws = sample_demand(law, rng, 4_000 * (lead + 1)).reshape(-1, lead + 1).sum(axis=1)
    level = int(np.quantile(draws, service))  # order-up-to level covering lead time + 1 day
    demand = sample_demand(law, rng, days)
    on_hand, pipeline = level, [0] * lead
    sales = np.zeros(days, dtype=np.int64)
    out = np.zeros(days, dtype=np.int64)
    for t in range(days):
        on_hand += pipeline.pop(0)
        pipeline.append(max(level - on_hand - sum(pipeline), 0))
        sales[t] = min(demand[t], on_hand)
        out[t] = int(demand[t] >= on_hand)  # stock ran out (or was out): sales <= demand
        on_hand -= sales[t]
    return sales, out


def sales_csv() -> str:
    rows = []
    for i, (name, law, lead, service, _, _) in enumerate(ITEMS):
        rng = np.random.default_rng([SEED, i])
        sales, out = simulate(law, lead, service, rng, DAYS)
        first = DAYS - NEW_ITEMS.get(name, DAYS)
        for t in range(first, DAYS):
            rows.append((t, i, (START + dt.timedelta(days=t)).isoformat(), name, int(sales[t]), int(out[t])))
    rows.sort()
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["date", "item", "units", "stockout"])
    w.writerows(r[2:] for r in rows)
    return buf.getvalue()


def items_csv() -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["item", "model", "lead_time", "holding_cost", "shortage_cost"])
    for name, _, lead, _, h, p in ITEMS:
        w.writerow([name, "lost_sales", lead, h, p])
    return buf.getvalue()


def write(out: Path) -> list[Path]:
    out.mkdir(parents=True, exist_ok=True)
    paths = [out / SALES_FILE, out / ITEMS_FILE]
    for path, text in zip(paths, (sales_csv(), items_csv())):
        path.write_text(text, encoding="utf-8", newline="")
    return paths


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", type=Path, default=Path(__file__).parent / "data")
    args = ap.parse_args(argv)
    for p in write(args.out):
        print(p)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
