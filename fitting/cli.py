"""Command-line plug-in `invbench fit SALES.csv`: from daily sales with stock-outs to one
instance file per item plus a summary table. Loaded by `invbench.cli` through `register`.

Order of work: read and check every input, check every output path, then fit and write.
"""
from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from invbench.envs.errors import SpecError

from .estimators import FAMILIES

# option dest -> instance field, for the settings given on the command line
_SETTING_OPTIONS = {"model": "model", "lead_time": "lead_time", "holding_cost": "holding_cost",
                    "shortage_cost": "shortage_cost", "unit_order_cost": "unit_order_cost",
                    "fixed_order_cost": "fixed_order_cost", "case_pack": "case_pack", "discount": "discount"}


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "fit", help="fit demand laws to daily sales with stock-outs and write one instance file per item",
        description="For each item: censored maximum-likelihood Poisson and negative binomial, and the "
                    "Kaplan-Meier estimator (stock-out days are right-censored: demand >= sales); the law "
                    "with the smallest AIC is written into ITEM.toml in --out, with a summary table.")
    p.add_argument("sales", help="CSV with columns date, item, units and optionally stockout (0/1)")
    p.add_argument("--out", default="fitted", help="folder for the instance files and fit_summary.csv (default: fitted)")
    p.add_argument("--summary", default=None, help="summary CSV path (default: OUT/fit_summary.csv)")
    p.add_argument("--overwrite", action="store_true", help="replace instance files that already exist")
    p.add_argument("--items", default=None,
                   help="CSV with one row per item: column item and any of model, lead_time, holding_cost, "
                        "shortage_cost, unit_order_cost, fixed_order_cost, max_order, case_pack, discount "
                        "(empty cells take the option values)")
    p.add_argument("--family", default="auto", choices=("auto", *FAMILIES),
                   help="demand law to write (default auto: smallest AIC)")
    g = p.add_argument_group("instance settings for every item (an --items file overrides them)")
    g.add_argument("--model", default="lost_sales", help="lost_sales (default) or backorder")
    g.add_argument("--lead-time", type=int, default=None, help="periods (days) between order and delivery")
    for opt in ("holding-cost", "shortage-cost", "unit-order-cost", "fixed-order-cost", "discount"):
        g.add_argument(f"--{opt}", type=float, default=None)
    g.add_argument("--case-pack", type=int, default=None)
    c = p.add_argument_group("column names and formats of the sales file")
    c.add_argument("--date-col", default="date")
    c.add_argument("--item-col", default="item")
    c.add_argument("--units-col", default="units")
    c.add_argument("--stockout-col", default=None, help="stock-out flag column (default: stockout, if present)")
    c.add_argument("--no-stockout", action="store_true", help="ignore any stock-out column: no day is censored")
    c.add_argument("--date-format", default="%Y-%m-%d", help="strftime format of the dates (default %%Y-%%m-%%d)")
    c.add_argument("--max-units", type=int, default=None, help="largest daily sales accepted (default 100000)")
    p.add_argument("--json", action="store_true", help="print the per-item results as JSON instead of the table")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    p.set_defaults(func=_fit)


def _settings_from_options(args: argparse.Namespace) -> dict[str, Any]:
    from .item_settings import check_settings
    s = {field: getattr(args, dest) for dest, field in _SETTING_OPTIONS.items() if getattr(args, dest) is not None}
    check_settings(s, lambda f: "--" + f.replace("_", "-"))
    return s


def _fit(args: argparse.Namespace) -> int:
    from tqdm.auto import tqdm

    from .item_settings import read_item_settings
    from .output import build_instance, format_summary, plan_outputs, summary_row, write_instance, write_summary_csv
    from .reading import DEFAULT_MAX_UNITS, Columns, read_sales
    from .selection import fit_item

    if args.stockout_col is not None and args.no_stockout:
        raise SpecError("--stockout-col: cannot be combined with --no-stockout")
    max_units = DEFAULT_MAX_UNITS if args.max_units is None else args.max_units
    if max_units < 1:
        raise SpecError(f"--max-units: must be >= 1, got {max_units}")
    defaults = _settings_from_options(args)
    cols = Columns(args.date_col, args.item_col, args.units_col,
                   None if args.no_stockout else (args.stockout_col or "stockout"))
    data = read_sales(args.sales, cols, args.date_format, max_units, stockout_required=args.stockout_col is not None)
    names = [h.name for h in data.items]
    for h in data.items:
        if h.censored.all():
            raise SpecError(f"column {cols.stockout!r}: item {h.name!r} has a stock-out on all {h.days} days; "
                            "at least one day without a stock-out is needed")
    notes = list(data.notes)
    if args.items:
        settings, more = read_item_settings(args.items, args.item_col, defaults, names)
        notes += more
    else:
        settings = {n: dict(defaults) for n in names}
    paths, summary_path = plan_outputs(names, args.out, args.summary, args.overwrite)

    show_bar = not args.no_progress and not args.json and sys.stderr.isatty()
    fits, rows = [], []
    for h in tqdm(data.items, desc="fit", unit="item", disable=not show_bar, leave=False):
        f = fit_item(h, args.family)
        spec = build_instance(f, settings[h.name])
        write_instance(spec, paths[h.name])
        fits.append(f)
        rows.append(summary_row(f, paths[h.name]))
    write_summary_csv(rows, summary_path)

    if args.json:
        out = {"items": [{**f.to_dict(), "file": str(paths[f.item]), "instance": settings[f.item]} for f in fits],
               "summary_csv": str(summary_path), "notes": notes}
        print(json.dumps(out, indent=2, allow_nan=False, default=_jsonable))
        return 0
    for line in format_summary(fits):
        print(line)
    for n in notes:
        print(f"note: {n}")
    print(f"wrote {len(fits)} instance file(s) to {args.out} and the summary to {summary_path}")
    return 0


def _jsonable(x: Any) -> Any:
    import numpy as np
    if isinstance(x, np.generic):
        return x.item()
    raise TypeError(f"not JSON serialisable: {type(x).__name__}")
