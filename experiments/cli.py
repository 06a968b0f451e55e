"""Command-line plug-in of the experiments part: `bench`, `report` and `bench-compare`.

Loaded by `invbench.cli` through `register(subparsers)`. Bad input raises SpecError, which
the main CLI turns into one line and exit code 2.
"""
from __future__ import annotations

import argparse
import math
import sys
from pathlib import Path
from typing import Any

from invbench.envs.errors import SpecError

#: Most processes `--workers` may ask for; more would only queue on the same cores.
MAX_WORKERS = 1024
#: What a results folder holds (checked before a run so nothing is in the way of a write).
RESULT_DIRS = ("cells", "failed", "damaged", "agents", "stale")
RESULT_FILES = ("suite.toml", "results.csv", "results.parquet", "run.json")
REPORT_FILES = ("report.md", "report.html", "gap.png", "gap_vs_lead_time.png", "learning_curves.png",
                "policy_map.png", "results.csv", "results.parquet")


def int_option(text: Any, name: str, lo: int, hi: int) -> int:
    """An integer option in [lo, hi]; "nan", "inf", "2.5" are refused with the range."""
    try:
        v = int(str(text).strip())
    except ValueError:
        raise SpecError(f"{name}: must be an integer in [{lo}, {hi}], got {text!r}") from None
    if not lo <= v <= hi:
        raise SpecError(f"{name}: must be an integer in [{lo}, {hi}], got {v}")
    return v


def float_option(text: Any, name: str, lo: float, hi: float) -> float:
    """A finite number option in (lo, hi]; NaN and infinities are refused with the range."""
    try:
        v = float(str(text).strip())
    except ValueError:
        v = math.nan
    if not (math.isfinite(v) and lo < v <= hi):
        raise SpecError(f"{name}: must be a finite number in ({lo:g}, {hi:g}], got {text!r}")
    return v


def register(subparsers: Any) -> None:
    b = subparsers.add_parser(
        "bench", help="run a benchmark suite (resumes an interrupted run in the same --out)",
        description="Run every (instance, policy, seed) cell of a suite, store each finished cell "
                    "at once, and write the results table and a report. Rerunning the same command "
                    "skips finished cells.")
    b.add_argument("suite", nargs="?", help="suite TOML file, or the name of a packaged suite (see --list)")
    b.add_argument("--out", help="results folder (default: runs/SUITE-NAME)")
    b.add_argument("--workers", default=None,
                   help="processes running cells at once (default: CPU count; 1 = in this process); with ray and no "
                        "--address, the CPUs of the private Ray instance")
    b.add_argument("--backend", default="local", help="local (process pool, default) or ray")
    b.add_argument("--address", default=None,
                   help="ray backend: address HOST:PORT of a running Ray cluster (default: a private local Ray instance)")
    b.add_argument("--skip-agents", action="store_true", help="leave out the RL agent cells")
    b.add_argument("--rerun-stale", action="store_true",
                   help="train again finished agent cells whose recorded settings differ from today's "
                        "defaults (the old results move to stale/)")
    b.add_argument("--no-report", action="store_true", help="do not write the report at the end")
    b.add_argument("--no-progress", action="store_true", help="no progress bar (summary lines only)")
    b.add_argument("--list", action="store_true", help="list the packaged suites and exit")
    b.add_argument("--format", default=None, metavar="FMT,...",
                   help="also write the figures as svg / pdf and the summary table as tex / md (or all)")
    b.set_defaults(func=_bench)

    r = subparsers.add_parser("report", help="write report.md, report.html and PNG plots for a results folder")
    r.add_argument("dir", help="results folder written by `invbench bench`")
    r.add_argument("--format", default=None, metavar="FMT,...",
                   help="also write the figures as svg / pdf and the summary table as tex / md (or all)")
    r.add_argument("--agents", action="store_true",
                   help="instead of the report, print the agents' table as Markdown (gap to the optimum: mean, max, "
                        "spread across seeds; worse than the best classical policy; per model family; missing cells "
                        "of a partial run) and save it as DIR/agents.md")
    r.set_defaults(func=_report)

    c = subparsers.add_parser(
        "bench-compare", help="compare a results folder with reference results, cell by cell",
        description="Match cells by (instance, policy, seed) and check the cost within tolerance: exact "
                    "cells to a relative --rtol-exact, simulated cells to the 95% interval of a "
                    "difference of two estimates, sqrt(ci_new^2 + ci_ref^2). Exit 1 when any differs.")
    c.add_argument("dir", help="results folder (or results CSV/Parquet) to check")
    c.add_argument("reference", help="reference results CSV/Parquet (or folder)")
    c.add_argument("--rtol-exact", default="2e-6",
                   help="relative tolerance for exact cells (default 2e-6: twice the solver's certified gap)")
    c.add_argument("--update", action="store_true",
                   help="write DIR's results (timing columns left out) as the new reference instead of comparing")
    c.set_defaults(func=_compare)


def _bench(args: argparse.Namespace) -> int:
    from .interrupts import Terminated, stop_on_sigterm
    from .suite import load_suite, packaged_suites

    if args.list:
        for name in packaged_suites():
            s = load_suite(name)
            print(f"{name:24s} {len(s.cells())} cells  {s.description}")
        return 0
    if not args.suite:
        raise SpecError("suite: required (a TOML file or a packaged suite name; see --list)")
    if args.backend not in ("local", "ray"):
        raise SpecError(f"--backend: must be one of local, ray, got {args.backend!r}")
    if args.workers is not None:
        args.workers = int_option(args.workers, "--workers", 1, MAX_WORKERS)
    if args.address is not None and args.backend != "ray":
        raise SpecError("--address: only used with --backend ray")
    if args.address is not None and (not args.address.strip() or any(c.isspace() for c in args.address)):
        raise SpecError(f"--address: must be HOST:PORT of a running Ray cluster, got {args.address!r}")
    from invbench.envs.paths import check_output_dir

    from .report import extra_files, parse_formats

    # Everything is checked before the first cell starts: the suite, completely, then --out.
    formats = parse_formats(args.format)
    if formats and args.no_report:
        raise SpecError("--format: chooses report files; leave it out with --no-report")
    suite = load_suite(args.suite)
    out = check_output_dir(Path(args.out) if args.out else Path("runs") / suite.name, "--out",
                           RESULT_DIRS, RESULT_FILES + (() if args.no_report else REPORT_FILES + extra_files(formats)))
    from .runner import run_bench

    try:
        with stop_on_sigterm():
            res = run_bench(suite, out, backend=args.backend, workers=args.workers, address=args.address,
                            skip_kinds=("agent",) if args.skip_agents else (), progress=not args.no_progress,
                            command=["invbench", *sys.argv[1:]], rerun_stale=args.rerun_stale)
    except Terminated:
        sys.stderr.write(f"invbench: terminated (SIGTERM); finished cells are kept and {out / 'results.csv'} "
                         f"is up to date; rerun the same command to resume\n")
        return 143
    from .console_table import format_tables
    from .store import read_table

    table = res.out / "results.csv"
    if table.exists() and res.cells:
        for line in format_tables(read_table(res.out)):
            print(line)
        print()
    print(f"results: {res.out / 'results.csv'} ({res.ran} cells run, {res.already_done} already done, "
          f"{len(res.failed)} failed, {res.seconds:.1f}s)")
    if not args.no_report:
        from .report import write_report

        rep = write_report(res.out, formats)
        print(f"report: {rep.html}")
        for p in rep.extra:
            print(f"  also: {p}")
    if res.failed:
        sys.stderr.write(f"invbench: {len(res.failed)} cell(s) failed; rerun the same command to retry them:\n")
        for line in res.failed[:20]:
            sys.stderr.write(f"  {line}\n")
        return 1
    return 0


def _report(args: argparse.Namespace) -> int:
    from invbench.envs.paths import check_output_dir
    from .report import extra_files, parse_formats, write_report

    formats = parse_formats(args.format)
    root = Path(args.dir)
    if not (root / "suite.toml").is_file():
        raise SpecError(f"dir: {root} has no suite.toml (give a results folder written by `invbench bench`)")
    if args.agents:
        if formats:
            raise SpecError("--format: chooses report files; leave it out with --agents")
        return _agents_table(root)
    check_output_dir(root, "dir", RESULT_DIRS, REPORT_FILES + extra_files(formats))
    rep = write_report(root, formats)
    for p in rep.files():
        print(p)
    for original, moved, reason in rep.unread:
        sys.stderr.write(f"invbench: warning: could not read {original} ({reason}); kept as {moved}, "
                         f"not in the report; rerun `invbench bench` to compute it again\n")
    return 0


def _agents_table(root: Path) -> int:
    from invbench.envs.paths import check_output_dir
    from .agent_table import run_agent_table
    from .store import ResultStore, atomic_write

    check_output_dir(root, "dir", RESULT_DIRS, REPORT_FILES + ("agents.md",))
    table = run_agent_table(root)
    if not table.overall:
        raise SpecError(f"dir: the suite of {root} has no agent entries (nothing for --agents to show)")
    md = table.markdown(f"Agents against the optimum: {ResultStore(root).suite().name}")
    atomic_write(root / "agents.md", md)
    print(md, end="")
    return 0


def _compare(args: argparse.Namespace) -> int:
    from invbench.envs.paths import check_output_file
    from .store import TIMING_COLUMNS, atomic_write, compare_results, read_table

    rtol = float_option(args.rtol_exact, "--rtol-exact", 0.0, 1.0)
    if args.update:
        target = check_output_file(args.reference, "reference", (".csv",))
        df = read_table(args.dir, "dir").drop(columns=TIMING_COLUMNS, errors="ignore")
        atomic_write(target, df.to_csv(index=False))
        print(f"reference written: {args.reference} ({len(df)} cells)")
        return 0
    new, ref = read_table(args.dir, "dir"), read_table(args.reference, "reference")
    res = compare_results(new, ref, rtol_exact=rtol)
    for line in res.lines():
        print(line)
    return 0 if res.ok else 1
