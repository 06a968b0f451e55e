"""Command-line plug-in `invbench portfolio ITEMS.csv|FIT_DIR`: every item of a portfolio in one
command, with a short summary, a per-item table and a report with a robustness section. Loaded by
`invbench.cli` through `register`. Everything is checked before the first cell starts.
"""
from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any

from invbench.envs.errors import SpecError

MAX_BOOTSTRAP = 100
MAX_STATES_LIMIT = 100_000_000


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "portfolio", help="run every item of a portfolio: best policy per item, optimum where tractable, robustness",
        description="For each item of ITEMS (an items CSV, a fit_summary.csv, or a folder written by `invbench fit`): "
                    "the exact optimum where tractable and every classical policy, optimised; the cheapest is chosen. "
                    "Then the chosen policy is measured on alternative demand laws against their own optima "
                    "(robustness). Rerunning the same command resumes an interrupted run.")
    p.add_argument("items", help="items CSV (item, model, lead_time, costs, demand, mean, ...), a fit_summary.csv, "
                                 "or a folder of instance files / written by `invbench fit`")
    p.add_argument("--out", default=None, help="results folder (default: runs/portfolio-NAME)")
    p.add_argument("--name", default=None, help="name of the run (default: from ITEMS)")
    p.add_argument("--sales", default=None,
                   help="the sales CSV the items were fitted to (columns date, item, units, stockout as `invbench fit` "
                        "reads them): enables the other-family and bootstrap alternatives")
    p.add_argument("--policies", default=None,
                   help="comma-separated classical policies to try (default: all for the items' models but constant_order)")
    p.add_argument("--agent", default=None, help="also train this agent on every item (e.g. ppo, rollout)")
    p.add_argument("--agent-steps", default="50000", help="training steps per item for --agent (default 50000)")
    p.add_argument("--max-states", default="500000",
                   help="largest state space for which the exact optimum is computed (default 500000)")
    p.add_argument("--no-robustness", action="store_true", help="skip the robustness stage")
    p.add_argument("--alternatives", default="wider,other_family,bootstrap,random_lead_time",
                   help="alternative models for the robustness stage (default: wider,other_family,bootstrap,random_lead_time)")
    p.add_argument("--variance-factor", default="2", help="variance of the `wider` law over the item's (default 2)")
    p.add_argument("--bootstrap", default="3", help="bootstrap resamples per item (default 3; 0: none)")
    p.add_argument("--seed", default="0", help="seed of the bootstrap resamples and of simulated evaluations")
    p.add_argument("--workers", default=None, help="processes running cells at once (default: CPU count)")
    p.add_argument("--backend", default="local", help="local (process pool, default) or ray")
    p.add_argument("--address", default=None, help="ray backend: HOST:PORT of a running Ray cluster")
    p.add_argument("--worst", default="10", help="worst items listed on the console (default 10)")
    p.add_argument("--no-report", action="store_true", help="do not write report.md / report.html")
    p.add_argument("--no-progress", action="store_true", help="no progress bars")
    p.add_argument("--json", action="store_true", help="print the run summary as JSON instead of the text summary")
    p.set_defaults(func=_portfolio)


def _check_args(args: argparse.Namespace) -> dict[str, Any]:
    from invbench.experiments.cli import MAX_WORKERS, float_option, int_option
    from invbench.experiments.suite_checks import MAX_SEED

    from .alternatives import KINDS

    o: dict[str, Any] = {
        "max_states": int_option(args.max_states, "--max-states", 1, MAX_STATES_LIMIT),
        "variance_factor": float_option(args.variance_factor, "--variance-factor", 1.0, 100.0),
        "replicates": int_option(args.bootstrap, "--bootstrap", 0, MAX_BOOTSTRAP),
        "seed": int_option(args.seed, "--seed", 0, MAX_SEED),
        "worst": int_option(args.worst, "--worst", 0, 1000),
        "workers": None if args.workers is None else int_option(args.workers, "--workers", 1, MAX_WORKERS),
    }
    kinds = tuple(k.strip() for k in args.alternatives.split(",") if k.strip())
    if not kinds or any(k not in KINDS for k in kinds):
        raise SpecError(f"--alternatives: a comma-separated list from {', '.join(KINDS)}, got {args.alternatives!r}")
    o["kinds"] = kinds
    o["policies"] = None if args.policies is None else [x.strip() for x in args.policies.split(",") if x.strip()]
    if args.backend not in ("local", "ray"):
        raise SpecError(f"--backend: must be one of local, ray, got {args.backend!r}")
    if args.address is not None and args.backend != "ray":
        raise SpecError("--address: only used with --backend ray")
    if args.address is not None and (not args.address.strip() or any(c.isspace() for c in args.address)):
        raise SpecError(f"--address: must be HOST:PORT of a running Ray cluster, got {args.address!r}")
    o["agent"] = None
    if args.agent is not None:
        from invbench.experiments import suite_checks
        suite_checks.agent(args.agent, {}, "--agent")
        o["agent"] = {"agent": args.agent, "steps": int_option(args.agent_steps, "--agent-steps", 1, 10**9)}
    return o


def _histories(path: str | None, names: list[str]) -> dict[str, Any] | None:
    if path is None:
        return None
    from invbench.fitting import read_sales

    data = read_sales(path)
    hist = {h.name: h for h in data.items}
    if not any(n in hist for n in names):
        raise SpecError(f"--sales: {path!r} has no sales for any item of the portfolio (items are matched by name)")
    return hist


def _portfolio(args: argparse.Namespace) -> int:
    from invbench.experiments.cli import RESULT_DIRS, RESULT_FILES
    from invbench.experiments.interrupts import Terminated, stop_on_sigterm
    from invbench.envs.paths import check_output_dir
    from invbench.experiments.suite import MAX_GRID

    from .items import read_portfolio
    from .report import REPORT_FILES
    from .run import OUTPUT_DIRS, OUTPUT_FILES, run_portfolio
    from .suites import classical_policies, suite_name

    o = _check_args(args)
    items = read_portfolio(args.items)
    classical_policies(o["policies"], {it.spec.model for it in items})  # checks the names now
    hist = _histories(args.sales, [it.name for it in items])
    if not args.no_robustness:
        per_item = ("wider" in o["kinds"]) + (0 if hist is None else ("other_family" in o["kinds"])
                                              + ("bootstrap" in o["kinds"]) * o["replicates"])
        if len(items) * per_item > MAX_GRID:
            raise SpecError(f"--bootstrap: {len(items):,} items x {per_item} alternatives = {len(items) * per_item:,} "
                            f"instances in the robustness stage, over its limit of {MAX_GRID:,}; lower --bootstrap, "
                            "or split the portfolio")
    src = Path(args.items)
    name = suite_name(args.name or (src.name if src.is_dir() and src.name else src.stem))
    out = check_output_dir(Path(args.out) if args.out else Path("runs") / f"portfolio-{name}", "--out",
                           OUTPUT_DIRS, OUTPUT_FILES + (() if args.no_report else REPORT_FILES))
    for stage in OUTPUT_DIRS:
        check_output_dir(out / stage, "--out", RESULT_DIRS, RESULT_FILES + ("cells.log",))
    print(f"portfolio {name}: {len(items)} items -> {out} (one line per cell in {out}/*/cells.log)", flush=True,
          file=sys.stderr if args.json else sys.stdout)  # with --json, stdout holds the JSON only
    try:
        with stop_on_sigterm():
            res = run_portfolio(items, out, histories=hist, name=name, policies=o["policies"], agent=o["agent"],
                                max_states=o["max_states"], robustness=not args.no_robustness, kinds=o["kinds"],
                                variance_factor=o["variance_factor"], replicates=o["replicates"], seed=o["seed"],
                                backend=args.backend, workers=o["workers"], address=args.address,
                                progress=not args.no_progress, command=["invbench", *sys.argv[1:]])
    except Terminated:
        sys.stderr.write(f"invbench: terminated (SIGTERM); finished cells are kept in {out}; rerun the same command "
                         "to resume\n")
        return 143
    rep = None if args.no_report else _report(res)
    if args.json:
        print(json.dumps({**res.to_dict(), "report": rep.to_dict() if rep else None}, indent=1, sort_keys=True))
    else:
        from .summary import summary_lines
        for line in summary_lines(res, o["worst"]):
            print(line)
        print(f"per-item table: {out / 'portfolio.csv'}" + ("" if args.no_robustness else
                                                          f"; regrets: {out / 'robustness.csv'}"))
        if rep is not None:
            print(f"report: {rep.html}")
    if res.failed:
        sys.stderr.write(f"invbench: {len(res.failed)} cell(s) failed; rerun the same command to retry them "
                         f"(first: {res.failed[0]})\n")
        return 1
    return 0


def _report(res: Any) -> Any:
    from .report import write_report
    return write_report(res)
