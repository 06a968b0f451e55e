"""Core commands: solve, evaluate, policies, demo."""
from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any

from invbench.baselines.exact import DEFAULT_MAX_MEMORY_MB, DEFAULT_MAX_STATES
from invbench.envs.errors import SpecError


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
    return out


def _solve(args: argparse.Namespace) -> int:
    from invbench.api import load_spec, solve
    from invbench.baselines.summary import summarize
    spec = load_spec(args.spec)
    if not 0 < args.rel_tol < 1:
        raise SpecError(f"--rel-tol: must be in (0, 1), got {args.rel_tol}")
    if args.max_states < 1 or args.max_memory_mb <= 0:
        raise SpecError("--max-states / --max-memory-mb: must be > 0")
    res = solve(spec, rel_tol=args.rel_tol, max_states=args.max_states, max_memory_mb=args.max_memory_mb,
                progress=not args.json and sys.stderr.isatty())
    if args.json:
        d = res.to_dict()
        d["instance"] = spec.to_dict()
        print(json.dumps(d, indent=2))
        return 0
    print(f"instance: {spec.label}")
    word = "average cost per period" if res.criterion == "average" else "discounted cost from empty start"
    print(f"optimal {word}: {res.cost:.6f}   certified bounds [{res.lower:.6f}, {res.upper:.6f}] "
          f"(relative gap {res.gap:.1e})")
    print(f"states: {res.states:,}   state-order pairs: {res.pairs:,}   iterations: {res.iterations}   "
          f"seconds: {res.seconds:.2f}   demand tail dropped: {res.truncation_mass:.1e}")
    for line in summarize(res):
        print(line)
    for note in res.notes:
        print(f"note: {note}")
    return 0


def _load_any_policy(spec: Any, name: str, params: dict[str, Any], progress: bool = False) -> Any:
    if Path(name).is_dir():
        try:
            from invbench.agents import load_policy
        except ImportError:
            raise SpecError(f"--policy: {name} is a directory but the agents part is not installed") from None
        return load_policy(name, spec=spec)
    from invbench.baselines.policies.registry import make_policy
    return make_policy(spec, name, params or None, progress=progress)


def _evaluate(args: argparse.Namespace) -> int:
    from invbench.api import evaluate, load_spec
    spec = load_spec(args.spec)
    params = _parse_params(args.param)
    tty = sys.stderr.isatty() and not args.json
    policy = _load_any_policy(spec, args.policy, params, progress=tty)
    method = "exact" if args.exact else "simulate" if args.simulate else "auto"
    opt = None
    if args.gap:
        from invbench.api import solve
        opt = solve(spec, progress=tty)
    ev = evaluate(spec, policy, method=method, optimum=opt, replications=args.replications,
                  periods=args.periods, warmup=args.warmup, seed=args.seed, progress=tty)
    if args.json:
        print(json.dumps(ev.to_dict(), indent=2))
        return 0
    print(f"instance: {spec.label}")
    print(f"policy: {ev.policy}")
    ci = "exact, no noise" if ev.method == "exact" else f"+- {ev.ci_halfwidth:.4f} (95% CI)"
    print(f"cost per period: {ev.cost:.6f}  {ci}")
    print(f"  holding {ev.holding:.4f}  shortage {ev.shortage:.4f}  ordering {ev.ordering:.4f}")
    if ev.gap is not None:
        print(f"gap to optimum ({ev.optimum:.6f}): {100 * ev.gap:.3f} %")
    if ev.note:
        print(f"note: {ev.note}")
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
    p.add_argument("--rel-tol", type=float, default=1e-6, help="certified relative gap (default 1e-6)")
    p.add_argument("--max-states", type=int, default=DEFAULT_MAX_STATES,
                   help=f"refuse instances with more states (default {DEFAULT_MAX_STATES:,})")
    p.add_argument("--max-memory-mb", type=float, default=DEFAULT_MAX_MEMORY_MB,
                   help=f"refuse instances whose estimated peak memory is larger (default {DEFAULT_MAX_MEMORY_MB:,} MiB)")
    p.set_defaults(func=_solve)

    p = sub.add_parser("evaluate", help="cost of a policy on an instance, exact or simulated")
    p.add_argument("spec", help="instance TOML file")
    p.add_argument("--policy", required=True, help="policy name (see `invbench policies`) or a trained-agent folder")
    p.add_argument("--param", action="append", metavar="KEY=VALUE", help="policy parameter; omit all to optimise")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--exact", action="store_true", help="exact evaluation only (fails if too large)")
    g.add_argument("--simulate", action="store_true", help="simulation only")
    p.add_argument("--gap", action="store_true", help="also solve exactly and report the gap to the optimum")
    p.add_argument("--replications", type=int, default=100)
    p.add_argument("--periods", type=int, default=2000)
    p.add_argument("--warmup", type=int, default=200)
    p.add_argument("--seed", type=int, default=0)
    p.add_argument("--json", action="store_true")
    p.set_defaults(func=_evaluate)

    p = sub.add_parser("policies", help="list the classical policies")
    p.set_defaults(func=_policies)

    p = sub.add_parser("demo", help="solve and compare all classical policies on three invented instances")
    p.set_defaults(func=_demo)
