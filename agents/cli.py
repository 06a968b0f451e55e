"""The `invbench train` command: train an agent on a spec file and export its policy.

Settings come from the agent's defaults, then the spec file's `[agent]` table, then `--set`;
`--agent/--steps/--seed` override the table's `name/steps/seed`. Bad values exit with code 2.
"""
from __future__ import annotations

import argparse
import json
from typing import Any

from invbench.cli_args import add_demand_limit, check_output_dir, check_spec_file, integer, number
from invbench.envs.errors import SpecError

DEFAULT_STEPS = 200_000


def register(subparsers: Any) -> None:
    p = subparsers.add_parser("train", help="train an RL agent on an instance and export its greedy policy",
                              description="Train an agent (ppo, a2c, dqn via stable-baselines3, or our rollout "
                                          "agent) on the instance in SPEC and export it to --out.")
    p.add_argument("spec", metavar="SPEC.toml", help="instance file; an [agent] table there sets defaults")
    p.add_argument("--agent", default=None, help="ppo, a2c, dqn or rollout (default: [agent] name, else ppo)")
    p.add_argument("--steps", type=integer(1), default=None,
                   help=f"environment steps (rollout: simulated periods; default {DEFAULT_STEPS:,})")
    p.add_argument("--seed", type=integer(0, 2**32 - 1), default=None, help="random seed (default 0)")
    p.add_argument("--out", default=None, help="output directory (policy.json, weights, learning curve)")
    p.add_argument("--set", dest="overrides", action="append", default=[], metavar="KEY=VALUE",
                   help="override one agent setting, e.g. --set learning_rate=1e-3 (repeatable)")
    p.add_argument("--max-cpu-seconds", type=number(0), default=0.0,
                   help="stop once this much CPU time is used (default 0: no limit)")
    add_demand_limit(p)
    p.add_argument("--no-optimum", action="store_true", help="do not solve for the optimum (no gap)")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    p.add_argument("--list-settings", action="store_true", help="list the agent's settings and exit")
    p.set_defaults(func=run)


def _int(name: str, v: Any, lo: int, hi: int) -> int:
    if isinstance(v, bool) or not isinstance(v, int) or not lo <= v <= hi:
        raise SpecError(f"agent.{name}: must be an integer in [{lo}, {hi}], got {v!r}")
    return v


def run(args: argparse.Namespace) -> int:
    from invbench.envs.spec import load_spec

    from .settings import RUN_KEYS, agent_table, describe_settings, parse_set

    spec = load_spec(check_spec_file(args.spec))
    table = agent_table(args.spec)
    agent = args.agent or table.get("name", "ppo")
    from .training import AGENTS, resolve_settings, train
    if not isinstance(agent, str) or agent not in AGENTS:
        raise SpecError(f"agent: must be one of {', '.join(AGENTS)}, got {agent!r}")
    if args.list_settings:
        for name, default, doc in describe_settings(resolve_settings(agent, None), agent):
            print(f"{name:24s} {str(default):14s} {doc}")
        return 0
    steps = _int("steps", args.steps if args.steps is not None else table.get("steps", DEFAULT_STEPS), 1, 10**12)
    seed = _int("seed", args.seed if args.seed is not None else table.get("seed", 0), 0, 2**32 - 1)
    if args.out is not None:
        check_output_dir(args.out, "--out")
    # [agent.<name>] sub-tables hold settings of one agent only; flat keys apply to the chosen one
    overrides = {k: v for k, v in table.items() if k not in RUN_KEYS and not (k in AGENTS and isinstance(v, dict))}
    overrides.update(table.get(agent, {}) if isinstance(table.get(agent), dict) else {})
    overrides.update(parse_set(args.overrides))
    settings = resolve_settings(agent, overrides)  # validates before any heavy work
    result = train(spec, agent, steps=steps, seed=seed, out=args.out, settings=settings,
                   optimum=None if args.no_optimum else "auto", max_cpu_seconds=args.max_cpu_seconds)
    if args.json:
        print(json.dumps(result.to_dict(), indent=2, default=str))
        return 0
    m = result.measured
    gap = f"{100 * m['gap']:.2f} %" if m.get("gap") is not None else "n/a"
    ci = f" +- {m['ci_halfwidth']:.4f}" if m.get("method") != "exact" else ""
    print(f"{agent} on {spec.label}: cost {m['cost']:.4f}{ci} ({m['method']}), gap to optimum {gap}, "
          f"{result.steps_done:,} steps, {result.cpu_seconds:.1f} CPU s")
    if args.out:
        print(f"policy exported to {args.out}")
    return 0
