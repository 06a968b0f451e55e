"""Core commands: solve, evaluate, policies, demo.

Every option value is range-checked by the parser (`cli_args`), every file before it is used,
so bad input ends in one line and exit code 2 before any work starts.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import sys
from pathlib import Path
from typing import Any

from invbench.baselines.exact import DEFAULT_MAX_MEMORY_MB, DEFAULT_MAX_STATES
from invbench.envs.errors import SpecError
from invbench.experiments.simulate import DEFAULT_MAX_PERIOD_STEPS

from .cli_args import add_demand_limit, check_output_dir, check_spec_file, integer, number


def _parse_params(items: list[str] | None) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for item in items or []:
        if "=" not in item:
            raise SpecError(f"--param: expected key=value, got {item!r}")
        k, v = item.split("=", 1)
        k = k.strip()
        if not k:
            raise SpecError(f"--param: empty key in {item!r}")
        try:
            out[k] = json.loads(v)
        except json.JSONDecodeError:
            out[k] = v
        if isinstance(out[k], float) and not math.isfinite(out[k]):
            raise SpecError(f"--param {k}: must be a finite number, got {v!r}")
    return out


def _check_table_file(path: str) -> Path:
    p = Path(path)
    if p.suffix.lower() not in (".csv", ".parquet"):
        raise SpecError(f"--table: the file must end in .csv or .parquet, got {p.name!r}")
    if p.is_dir():
        raise SpecError(f"--table: {p} is a directory, not a file")
    check_output_dir(p.parent, "--table")
    if p.suffix.lower() == ".parquet":
        try:
            import pyarrow  # noqa: F401
        except ImportError:
            raise SpecError("--table: writing .parquet needs pyarrow (pip install pyarrow), or use .csv") from None
    return p


def _solve(args: argparse.Namespace) -> int:
    from invbench.api import load_spec, solve
    from invbench.baselines.artifact import export_table, save_policy
    from invbench.baselines.artifact_io import check_save_dir
    from invbench.baselines.summary import summarize
    spec = load_spec(check_spec_file(args.spec))
    if args.save:  # output paths before the work
        check_save_dir(args.save, "--save")
    if args.table:
        _check_table_file(args.table)
    res = solve(spec, rel_tol=args.rel_tol, max_states=args.max_states, max_memory_mb=args.max_memory_mb,
                progress=not args.json and sys.stderr.isatty())
    saved = []
    if args.save:
        save_policy(res, args.save, states=args.states)
        saved.append(f"optimal policy ({args.states} states) saved to {args.save}")
    if args.table:
        export_table(res, args.table, states=args.states)
        saved.append(f"optimal table ({args.states} states) written to {args.table}")
    if args.json:
        d = res.to_dict()
        d["instance"] = spec.to_dict()
        print(json.dumps(d, indent=2))
        for line in saved:
            sys.stderr.write(line + "\n")
        return 0
    print(f"instance: {spec.label}")
    word = "average cost per period" if res.criterion == "average" else "discounted cost from empty start"
    print(f"optimal {word}: {res.cost:.6f}   certified bounds [{res.lower:.6f}, {res.upper:.6f}] "
          f"(relative gap {res.gap:.1e})")
    if res.mdp is None:  # the model's own exact method: no states were enumerated
        print(f"method: {res.method}, {res.iterations} recursion steps over {res.states:,} levels   "
              f"seconds: {res.seconds:.2f}   demand tail dropped: {res.truncation_mass:.1e}")
    else:
        print(f"states: {res.states:,}   state-order pairs: {res.pairs:,}   iterations: {res.iterations}   "
              f"seconds: {res.seconds:.2f}   demand tail dropped: {res.truncation_mass:.1e}")
    for line in summarize(res):
        print(line)
    for note in res.notes:
        print(f"note: {note}")
    for line in saved:
        print(line)
    return 0


def custom_reference(name: str) -> bool:
    from invbench.baselines.custom import is_reference
    return is_reference(name)


def _load_custom(spec: Any, ref: str, params: dict[str, Any], seed: int = 0,
                 evaluation: dict[str, Any] | None = None, progress: bool = False) -> Any:
    """A user's policy factory, imported relative to the current folder; optimised over its
    declared `parameters` when no --param is given."""
    from invbench.baselines import custom
    try:
        fn = custom.load_factory(ref, Path.cwd())
        if not params and custom.parameters(fn, ref):
            return custom.optimise(fn, ref, spec, seed, evaluation or {}, progress=progress)[0]
        return custom.build(fn, ref, spec, params, seed, evaluation or {})
    except SpecError as e:
        msg = str(e)
        raise SpecError("--policy:" + msg[len("function:"):] if msg.startswith("function:") else msg) from None


def _load_any_policy(spec: Any, name: str, params: dict[str, Any], progress: bool = False,
                     allow_other_instance: bool = False, custom: dict[str, Any] | None = None) -> Any:
    """A classical policy by name, a user's "module:callable" or "file.py:callable", or a saved
    policy from its folder (told apart by the path)."""
    from invbench.baselines.artifact import load_policy
    from invbench.baselines.policies.registry import make_policy, policy_names
    path = Path(name)
    if custom_reference(name) and not path.exists():
        return _load_custom(spec, name, params, **(custom or {}))
    if path.is_dir():
        if params:
            raise SpecError(f"--param: a saved policy ({name}) takes no parameters")
        return load_policy(name, spec=spec, allow_other_instance=allow_other_instance)
    if path.exists():
        raise SpecError(f"--policy: {name} is a file; give a policy name ({', '.join(policy_names())}) "
                        "or a saved-policy folder")
    if name not in policy_names():
        if "/" in name or os.sep in name or name.startswith((".", "~")):
            raise SpecError(f"--policy: folder {name!r} does not exist (expected a saved-policy folder "
                            "holding policy.json)")
        raise SpecError(f"--policy: must be one of {', '.join(policy_names())} or a saved-policy folder, "
                        f"got {name!r} (no such name or folder)")
    return make_policy(spec, name, params or None, progress=progress)


def _evaluate(args: argparse.Namespace) -> int:
    from invbench.api import evaluate, load_spec
    from invbench.experiments.simulate import check_simulation_budget
    spec = load_spec(check_spec_file(args.spec))
    params = _parse_params(args.param)
    if args.save and custom_reference(args.policy) and not Path(args.policy).exists():
        raise SpecError("--save: a policy of your own (module:callable) is not saved; keep its file, "
                        "or save a classical or solved policy")
    if args.save:  # before the policy is optimised
        from invbench.baselines.artifact_io import check_save_dir
        check_save_dir(args.save, "--save")
    tty = sys.stderr.isatty() and not args.json
    method = "exact" if args.exact else "simulate" if args.simulate else "auto"
    if method != "exact":  # before the policy is optimised or the optimum solved
        steps = args.periods if spec.discount < 1 else args.warmup + args.periods
        check_simulation_budget(spec.state_dim, args.replications, steps, args.max_period_steps, args.max_memory_mb)
    custom = {"seed": args.seed, "progress": tty, "evaluation": {
        "method": method, "replications": args.replications, "periods": args.periods, "warmup": args.warmup}}
    policy = _load_any_policy(spec, args.policy, params, progress=tty,
                              allow_other_instance=args.allow_other_instance, custom=custom)
    opt = None
    if args.gap:
        from invbench.api import solve
        opt = solve(spec, progress=tty, max_memory_mb=args.max_memory_mb)
    ev = evaluate(spec, policy, method=method, optimum=opt, replications=args.replications,
                  periods=args.periods, warmup=args.warmup, seed=args.seed, progress=tty,
                  max_period_steps=args.max_period_steps, max_memory_mb=args.max_memory_mb)
    if args.save:
        from invbench.baselines.artifact import save_policy
        save_policy(policy, args.save, measured=ev.to_dict())
    if args.json:
        print(json.dumps(ev.to_dict(), indent=2))
        if args.save:
            sys.stderr.write(f"policy saved to {args.save}\n")
        return 0
    print(f"instance: {spec.label}")
    print(f"policy: {ev.policy}")
    ci = "exact, no noise" if ev.method == "exact" else f"+- {ev.ci_halfwidth:.4f} (95% CI)"
    print(f"cost per period: {ev.cost:.6f}  {ci}")
    print("  " + "  ".join(f"{k} {v:.4f}" for k, v in ev.parts.items()))  # the model's own cost parts
    if ev.gap is not None:
        print(f"gap to optimum ({ev.optimum:.6f}): {100 * ev.gap:.3f} %")
    if ev.note:
        print(f"note: {ev.note}")
    if args.save:
        print(f"policy saved to {args.save} (use it with `invbench decide {args.save} --state ...`)")
    return 0


def _policies(args: argparse.Namespace) -> int:
    from invbench.api import policies
    for name, line in policies().items():
        print(f"{name:<20} {line}")
    return 0


def _demo(args: argparse.Namespace) -> int:
    from invbench.demo_run import run_demo
    return run_demo(progress=sys.stderr.isatty())


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("solve", help="certified exact optimum of an instance")
    p.add_argument("spec", help="instance TOML file")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    p.add_argument("--rel-tol", type=number(0, 1, lo_open=True, hi_open=True), default=1e-6,
                   help="certified relative gap, in (0, 1) (default 1e-6)")
    p.add_argument("--max-states", type=integer(1), default=DEFAULT_MAX_STATES,
                   help=f"refuse instances with more states (default {DEFAULT_MAX_STATES:,})")
    p.add_argument("--max-memory-mb", type=number(0, lo_open=True), default=DEFAULT_MAX_MEMORY_MB,
                   help=f"refuse instances whose estimated peak memory is larger (default {DEFAULT_MAX_MEMORY_MB:,} MiB)")
    p.add_argument("--save", metavar="DIR", help="save the optimal policy to DIR (for decide, serve, evaluate)")
    p.add_argument("--table", metavar="FILE", help="write the optimal table as FILE.csv or FILE.parquet")
    p.add_argument("--states", choices=("all", "reachable"), default="all",
                   help="what --save and --table keep: every state of the solver's space (default) or only "
                        "those reachable from the empty start under the optimal policy")
    add_demand_limit(p)
    p.set_defaults(func=_solve)

    p = sub.add_parser("evaluate", help="cost of a policy on an instance, exact or simulated")
    p.add_argument("spec", help="instance TOML file")
    p.add_argument("--policy", required=True, help="policy name (see `invbench policies`), a saved-policy folder, or your own "
                   "factory as module:callable or file.py:callable (imported from the current folder)")
    p.add_argument("--param", action="append", metavar="KEY=VALUE", help="policy parameter; omit all to optimise")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--exact", action="store_true", help="exact evaluation only (fails if too large)")
    g.add_argument("--simulate", action="store_true", help="simulation only")
    p.add_argument("--gap", action="store_true", help="also solve exactly and report the gap to the optimum")
    p.add_argument("--replications", type=integer(2), default=100, help="simulated replications (default 100)")
    p.add_argument("--periods", type=integer(1), default=2000, help="measured periods per replication (default 2000)")
    p.add_argument("--warmup", type=integer(0), default=200, help="periods discarded first (default 200)")
    p.add_argument("--seed", type=integer(0, 2**63 - 1), default=0)
    p.add_argument("--max-period-steps", type=number(0, lo_open=True), default=DEFAULT_MAX_PERIOD_STEPS,
                   help=f"refuse simulations of more replications x periods (default {DEFAULT_MAX_PERIOD_STEPS:.0e})")
    p.add_argument("--max-memory-mb", type=number(0, lo_open=True), default=DEFAULT_MAX_MEMORY_MB,
                   help=f"memory limit of the simulation and of --gap's solve (default {DEFAULT_MAX_MEMORY_MB:,} MiB)")
    p.add_argument("--allow-other-instance", action="store_true",
                   help="apply a saved policy to an instance other than the one it was made for")
    p.add_argument("--save", metavar="DIR", help="save the policy (with its parameters and this evaluation) to DIR")
    add_demand_limit(p)
    p.add_argument("--json", action="store_true")
    p.set_defaults(func=_evaluate)

    p = sub.add_parser("policies", help="list the classical policies")
    p.set_defaults(func=_policies)

    p = sub.add_parser("demo", help="solve and compare all classical policies on three invented instances")
    p.set_defaults(func=_demo)
