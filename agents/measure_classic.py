"""Measured quality of the agents on the classic lost-sales grid (a benchmark, not a test).

Poisson demand with mean 5, h = 1, L = 1..4, p = 4, 9, 19, 39. For each chosen instance and
agent: train with a CPU-time budget, then record the exact gap to the certified optimum next
to the best base-stock and best capped base-stock policies, with seeds, versions and times.
Run: `python -m invbench.agents.measure_classic --instances L1p4,L4p39 --agents ppo,rollout`.
Writes one JSON per run and a summary (Markdown + CSV) rebuilt from all JSON files present.
"""
from __future__ import annotations

import argparse
import csv
import io
import json
import sys
import time
from pathlib import Path
from typing import Any

from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec, spec_from_dict

DEFAULT_OUT = Path(__file__).resolve().parent.parent / "experiments" / "results" / "classic-lost-sales"
LEADS, PENALTIES = (1, 2, 3, 4), (4, 9, 19, 39)
#: Settings used for the measurement on top of the agents' defaults (1 thread: CPU time = wall time).
RUN_SETTINGS: dict[str, dict[str, Any]] = {
    "ppo": {"threads": 1, "progress": False, "eval_every": 250_000, "checkpoint_every": 0},
    "rollout": {"threads": 1, "progress": False, "iterations": 1000, "checkpoint_every": 0},
}


def instance(key: str) -> InstanceSpec:
    """'L2p19' -> the classic instance with lead time 2 and shortage cost 19."""
    try:
        L, p = key.upper().lstrip("L").split("P")
        L, p = int(L), int(p)
    except ValueError:
        raise SpecError(f"instances: expected keys like L2p19, got {key!r}") from None
    return spec_from_dict({"name": f"classic-L{L}-p{p}", "model": "lost_sales", "lead_time": L, "holding_cost": 1.0,
                           "shortage_cost": float(p), "demand": {"distribution": "poisson", "mean": 5}})


def baselines(spec: InstanceSpec) -> dict[str, Any]:
    """Optimum and best classical policies, all evaluated exactly."""
    from invbench.baselines.exact import solve
    from invbench.baselines.policy_eval import evaluate_exact
    out: dict[str, Any] = {}
    t0 = time.perf_counter()
    sol = solve(spec)
    out["optimum"] = {"cost": sol.cost, "lower": sol.lower, "upper": sol.upper, "seconds": time.perf_counter() - t0}
    try:
        from invbench.baselines.policies import make_policy
    except ImportError:
        return out
    for name in ("base_stock", "capped_base_stock"):
        t0 = time.perf_counter()
        pol = make_policy(spec, name)
        ev = evaluate_exact(spec, pol)
        out[name] = {"params": pol.params(), "cost": ev.cost, "gap": (ev.cost - sol.cost) / sol.cost,
                     "seconds": time.perf_counter() - t0}
    return out


def run_one(key: str, agent: str, seed: int, cpu_minutes: float, out: Path, extra: dict[str, Any],
            base: dict[str, Any]) -> dict[str, Any]:
    from .export import versions, write_json_atomic
    from .training import train
    spec = instance(key)
    settings = {**RUN_SETTINGS.get(agent, {"threads": 1, "progress": False}), **extra}
    policy_dir = out / "policies" / f"{key}-{agent}-seed{seed}"
    res = train(spec, agent, steps=10**12, seed=seed, out=policy_dir, settings=settings,
                optimum=base["optimum"]["cost"], max_cpu_seconds=60.0 * cpu_minutes)
    record = {"instance": key, "agent": agent, "seed": seed, "cpu_budget_seconds": 60.0 * cpu_minutes,
              "cost": res.measured["cost"], "method": res.measured["method"], "gap": res.measured["gap"],
              "optimum": base["optimum"]["cost"], "baselines": base, "steps_done": res.steps_done,
              "wall_seconds": res.wall_seconds, "cpu_seconds": res.cpu_seconds, "chosen": res.chosen,
              "settings": res.settings, "scaling": res.scaling, "curve": res.curve, "versions": versions(),
              "policy_dir": str(policy_dir.relative_to(out))}
    write_json_atomic(out / f"{key}-{agent}-seed{seed}.json", record)
    return record


def summarize(out: Path) -> str:
    """Rebuild summary.md / summary.csv from every run file in `out`; returns the Markdown."""
    from .export import _atomic_write
    rows = [json.loads(p.read_text()) for p in sorted(out.glob("L*-seed*.json"))]
    cols = ["instance", "agent", "seed", "optimum", "cost", "gap_pct", "method", "base_stock_gap_pct",
            "capped_base_stock_gap_pct", "cpu_seconds", "wall_seconds", "steps_done"]
    table = []
    for r in rows:
        b = r["baselines"]
        table.append({"instance": r["instance"], "agent": r["agent"], "seed": str(r["seed"]), "optimum": f"{r['optimum']:.4f}",
                      "cost": f"{r['cost']:.4f}", "gap_pct": f"{100 * r['gap']:.3f}", "method": r["method"],
                      "base_stock_gap_pct": f"{100 * b['base_stock']['gap']:.3f}" if "base_stock" in b else "",
                      "capped_base_stock_gap_pct": f"{100 * b['capped_base_stock']['gap']:.3f}" if "capped_base_stock" in b else "",
                      "cpu_seconds": f"{r['cpu_seconds']:.0f}", "wall_seconds": f"{r['wall_seconds']:.0f}",
                      "steps_done": str(r["steps_done"])})
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=cols, lineterminator="\n")
    w.writeheader()
    w.writerows(table)
    _atomic_write(out / "summary.csv", buf.getvalue().encode())
    md = ["| " + " | ".join(cols) + " |", "|" + "---|" * len(cols)]
    md += ["| " + " | ".join(t[c] for c in cols) + " |" for t in table]
    text = "\n".join(md) + "\n"
    _atomic_write(out / "summary.md", text.encode())
    return text


def main(argv: list[str] | None = None) -> int:
    from invbench.cli_args import check_output_dir, integer, number

    from .training import AGENTS
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--instances", default="all", help="comma list like L1p4,L4p39, or all (16)")
    ap.add_argument("--agents", default="ppo,rollout")
    ap.add_argument("--seed", type=integer(0, 2**32 - 1), default=0)
    ap.add_argument("--cpu-minutes", type=number(0, lo_open=True), default=10.0,
                    help="training budget per instance and agent")
    ap.add_argument("--out", default=str(DEFAULT_OUT))
    ap.add_argument("--set", dest="overrides", action="append", default=[], metavar="AGENT.KEY=VALUE",
                    help="extra setting for one agent, e.g. --set rollout.rollouts=16")
    a = ap.parse_args(argv)
    keys = [f"L{L}p{p}" for L in LEADS for p in PENALTIES] if a.instances == "all" else a.instances.split(",")
    extra: dict[str, dict[str, Any]] = {}
    for o in a.overrides:
        name, _, kv = o.partition(".")
        k, _, v = kv.partition("=")
        extra.setdefault(name, {})[k] = v
    try:  # every instance key, agent name and the output folder checked before hours of work
        for key in keys:
            instance(key)
        bad = [ag for ag in a.agents.split(",") if ag not in AGENTS]
        if bad:
            raise SpecError(f"agents: must be among {', '.join(AGENTS)}, got {bad[0]!r}")
        out = check_output_dir(a.out, "--out")
    except SpecError as e:
        sys.stderr.write(f"measure_classic: error: {e}\n")
        return 2
    out.mkdir(parents=True, exist_ok=True)
    for key in keys:
        base = baselines(instance(key))
        for agent in a.agents.split(","):
            r = run_one(key, agent, a.seed, a.cpu_minutes, out, extra.get(agent, {}), base)
            print(f"{key} {agent}: gap {100 * r['gap']:.3f} % ({r['method']}), {r['cpu_seconds']:.0f} CPU s", flush=True)
    sys.stdout.write(summarize(out))
    return 0


if __name__ == "__main__":
    sys.exit(main())
