"""One benchmark cell: build the policy its kind asks for, measure it, return a record.

`run_cell(payload)` is what every backend calls (in this process, in a pool worker or as a Ray
task). It takes and returns plain JSON-able dicts so the same function runs anywhere, and it
never raises: a cell that fails comes back with status "failed" and a one-line error, so one
bad cell cannot stop a run. Kinds are looked up in `CELL_KINDS`; the modules they need are
imported inside the kind's function, so a missing part only fails its own cells.
"""
from __future__ import annotations

import datetime as _dt
import importlib
import math
import os
import shutil
import socket
import time
import traceback
from pathlib import Path
from typing import Any, Callable

import numpy as np

from invbench.envs.spec import InstanceSpec, spec_from_dict


#: Largest grid side of a policy map; keeps cell files small.
MAP_MAX_SIDE = 40


class CellUnavailable(RuntimeError):
    """The part a cell kind needs is not installed in this version of invbench."""


def run_cell(payload: dict[str, Any]) -> dict[str, Any]:
    """Run one cell described by `Cell.to_payload()`; returns its record (never raises)."""
    pol = payload["policy"]
    rec: dict[str, Any] = {
        "cell_id": payload["cell_id"], "suite": payload["suite"], "policy": pol["label"],
        "kind": pol["kind"], "policy_name": pol.get("name") or pol.get("agent") or pol.get("function", ""),
        "seed": payload["seed"], "instance": payload["instance"].get("name", ""),
        "worker": f"{socket.gethostname()}:{os.getpid()}",
    }
    t0, c0 = time.perf_counter(), time.process_time()
    try:
        spec = spec_from_dict(payload["instance"])
        rec["instance"] = spec.label
        out = CELL_KINDS[pol["kind"]](spec, payload)
        rec.update(out)
        rec["status"] = "ok"
        rec["error"] = None
    except Exception as e:  # a failing cell is recorded, never fatal to the run
        rec["status"] = "failed"
        rec["error"] = f"{type(e).__name__}: {e}".splitlines()[0]
        rec["traceback"] = traceback.format_exc(limit=6)
    rec["wall_seconds"] = time.perf_counter() - t0
    rec["cpu_seconds"] = time.process_time() - c0
    rec["finished_at"] = _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")
    return rec


# ---------------------------------------------------------------------------- kinds
def _optimum_cell(spec: InstanceSpec, payload: dict[str, Any]) -> dict[str, Any]:
    from invbench.baselines.exact import solve

    res = solve(spec)
    out: dict[str, Any] = {"cost": res.cost, "ci_halfwidth": 0.0, "method": "exact",
                           "lower": res.lower, "upper": res.upper, "params": {},
                           "extras": {"solver": _solver_summary(res.to_dict())}}
    parts = _exact_parts(spec, res.policy)
    if parts:
        out.update(parts)
    out["extras"]["policy_map"] = policy_map(spec, res.policy)
    return out


def _classical_cell(spec: InstanceSpec, payload: dict[str, Any]) -> dict[str, Any]:
    try:
        from invbench.baselines.policies.registry import make_policy
    except ImportError as e:
        raise CellUnavailable(f"classical policies need invbench.baselines.policies.registry ({e})") from None
    pol = payload["policy"]
    policy = make_policy(spec, pol["name"], pol.get("params"))
    out = evaluate_policy(spec, policy, payload)
    out["params"] = policy_params(policy, pol.get("params"))
    out["extras"] = {"policy_map": policy_map(spec, policy)}
    return out


def _agent_cell(spec: InstanceSpec, payload: dict[str, Any]) -> dict[str, Any]:
    try:
        agents = importlib.import_module("invbench.agents")
        train = getattr(agents, "train")
    except (ImportError, AttributeError):
        raise CellUnavailable("agent cells need invbench.agents.train, which this version of "
                              "invbench does not have yet; run with --skip-agents") from None
    pol = payload["policy"]
    out_dir = Path(payload.get("artefact_dir") or Path.cwd() / "agents" / payload["cell_id"])
    if out_dir.exists():
        shutil.rmtree(out_dir)  # leftovers of a killed attempt must not mix with the new one
    out_dir.mkdir(parents=True)
    settings = agent_settings(pol)
    t0 = time.perf_counter()
    budget = {"max_cpu_seconds": float(pol["cpu_seconds"])} if pol.get("cpu_seconds") else {}
    trained = train(spec, agent=pol["agent"], steps=int(pol["steps"]), seed=int(payload["seed"]),
                    out=out_dir, settings=settings, **budget)
    train_seconds = time.perf_counter() - t0
    policy = getattr(trained, "policy", trained)
    out = evaluate_policy(spec, policy, payload)
    out["params"] = {"agent": pol["agent"], "steps": int(pol["steps"]), **(pol.get("settings") or {})}
    if pol.get("cpu_seconds"):
        out["params"]["cpu_seconds"] = pol["cpu_seconds"]
    done = getattr(trained, "steps_done", None)
    if done is not None:
        out["params"]["steps_done"] = int(done)
    out["extras"] = {"policy_map": policy_map(spec, policy), "train_seconds": train_seconds,
                     "chosen": getattr(trained, "chosen", None), "policy": policy.describe(),
                     "learning_curve": learning_curve(trained, out_dir), "artefacts": _artefacts(payload, out_dir)}
    return out


def agent_settings(pol: dict[str, Any]) -> dict[str, Any]:
    """The settings an agent entry trains with inside a bench (what the stale check compares)."""
    # No nested progress bars, and one torch thread per cell so that N workers share N cores
    # and a cell gives the same result on every backend. Both can be overridden.
    return {"progress": False, "threads": 1, **(pol.get("settings") or {})}


def _artefacts(payload: dict[str, Any], out_dir: Path) -> str:
    """Where the trained policy went: in a bench run relative to the results folder
    (`agents/CELL_ID`), so a folder that is copied, committed or synced still points at it."""
    if payload.get("artefact_dir"):
        return f"agents/{payload['cell_id']}"
    return str(out_dir)


def _custom_cell(spec: InstanceSpec, payload: dict[str, Any]) -> dict[str, Any]:
    """A user's `module:callable(spec, params=..., seed=..., evaluation=...)` (see baselines/custom.py).

    It returns either a policy (anything with `act`), which is then measured like any other,
    or a finished measurement (a mapping or an object with `to_dict()`) holding at least `cost`.
    Without params, a factory declaring `parameters` is optimised by exact evaluation first.
    """
    from invbench.baselines import custom

    pol = payload["policy"]
    ref, seed = pol["function"], int(payload["seed"])
    evaluation = dict(payload.get("evaluation") or {})
    fn = custom.load_factory(ref, pol.get("folder") or Path.cwd())
    params = dict(pol.get("params") or {})
    if not params and custom.parameters(fn, ref):
        got, params = custom.optimise(fn, ref, spec, seed, evaluation)
    else:
        got = custom.build(fn, ref, spec, params, seed, evaluation, measurement_ok=True)
    if hasattr(got, "act"):
        out = evaluate_policy(spec, got, payload)
        out["params"] = policy_params(got, params)
        out["extras"] = {"policy_map": policy_map(spec, got)}
        return out
    d = got.to_dict() if hasattr(got, "to_dict") else dict(got)
    if "cost" not in d:
        raise ValueError(f"function: {ref} returned a measurement without 'cost'")
    out = {k: d.get(k) for k in ("cost", "ci_halfwidth", "method", *spec.model_def.cost_parts)}
    out["params"] = d.get("params", params)
    out["extras"] = {k: d[k] for k in ("policy_map", "learning_curve") if k in d}
    return out


CELL_KINDS: dict[str, Callable[[InstanceSpec, dict[str, Any]], dict[str, Any]]] = {
    "optimum": _optimum_cell, "classical": _classical_cell, "agent": _agent_cell,
    "custom": _custom_cell,
}


# ---------------------------------------------------------------------------- helpers
def evaluate_policy(spec: InstanceSpec, policy: Any, payload: dict[str, Any]) -> dict[str, Any]:
    """Measure a policy with the shared evaluator: exact where it can, else simulated with a CI."""
    try:
        from invbench.experiments.evaluate import evaluate
    except ImportError as e:
        raise CellUnavailable(f"policy evaluation needs invbench.experiments.evaluate ({e})") from None
    kw = dict(payload.get("evaluation") or {})
    ev = evaluate(spec, policy, seed=int(payload["seed"]), **kw)
    method = getattr(ev, "method", "")
    parts = getattr(ev, "parts", None) or {}
    return {"cost": float(ev.cost), "ci_halfwidth": float(getattr(ev, "ci_halfwidth", 0.0) or 0.0),
            "method": "simulated" if method.startswith("sim") else method,
            **{k: _num(parts.get(k)) for k in spec.model_def.cost_parts}, "note": getattr(ev, "note", "") or ""}


def _exact_parts(spec: InstanceSpec, policy: Any) -> dict[str, float] | None:
    """Cost parts of a policy by exact evaluation, when that part exists and the size allows."""
    try:
        from invbench.baselines.policy_eval import evaluate_exact
    except ImportError:
        return None
    from invbench.envs.errors import BudgetError

    try:
        ev = evaluate_exact(spec, policy)
    except BudgetError:
        return None
    return {k: float(v) for k, v in ev.parts.items()}


def _solver_summary(d: dict[str, Any]) -> dict[str, Any]:
    keep = ("certified_gap", "iterations", "seconds", "states", "truncation_mass", "method", "widenings")
    return {k: d[k] for k in keep if k in d}


def _num(v: Any) -> float | None:
    if v is None:
        return None
    f = float(v)
    return f if math.isfinite(f) else None


def policy_params(policy: Any, given: Any) -> dict[str, Any]:
    """The parameters a policy reports (the optimised ones), else those the suite gave."""
    fn = getattr(policy, "params", None)
    if callable(fn):
        try:
            return dict(fn())
        except Exception:  # a policy's own description must not fail the measurement
            pass
    return dict(given or {})


def map_states(spec: InstanceSpec) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Grid of states for a policy map: on-hand x pipeline total (stock-and-pipeline states, L >= 2).

    The pipeline total is spread evenly over the L - 1 orders in transit (the remainder on the
    oldest), a typical shape of the pipeline when demand is steady. Axes reach about the
    demand over L + 1 periods plus two standard deviations.
    """
    L = spec.longest_lead_time  # the state's L - 1 pipeline entries (random lead time: the longest)
    mean, sd = spec.demand.mean, math.sqrt(spec.demand.var)
    top = int(min(MAP_MAX_SIDE - 1, math.ceil(mean * (L + 1) + 2 * sd * math.sqrt(L + 1))))
    on_hand = np.arange(top + 1)
    pipeline = np.arange(top + 1)
    slots = L - 1
    rows = []
    for y in pipeline:
        base, rem = divmod(int(y), slots)
        pipe = [base + (1 if i < rem else 0) for i in range(slots)]
        for x in on_hand:
            rows.append([int(x), *pipe])
    return on_hand, pipeline, np.asarray(rows, dtype=np.int64)


def policy_map(spec: InstanceSpec, policy: Any) -> dict[str, Any] | None:
    """Orders of a policy over `map_states` (rows: pipeline total, columns: on-hand), or None."""
    model = spec.model_def
    if not model.stock_then_pipeline or model.signed_level or spec.state_dim < 2:
        return None  # the map's axes are on-hand stock (>= 0) and units in transit
    on_hand, pipeline, states = map_states(spec)
    try:
        orders = np.asarray(policy.act(states)).reshape(len(pipeline), len(on_hand))
    except Exception:  # a policy that cannot answer off its own table simply has no map
        return None
    return {"on_hand": on_hand.tolist(), "pipeline": pipeline.tolist(),
            "orders": orders.astype(np.int64).tolist(), "pipeline_shape": "even"}


def learning_curve(trained: Any, out_dir: Path) -> list[dict[str, float]] | None:
    """The training log's (step, cost, gap) rows, from the result object or a CSV in out_dir."""
    import pandas as pd

    for attr in ("learning_curve", "curve"):
        val = getattr(trained, attr, None)
        if isinstance(val, list) and val and isinstance(val[0], dict):
            val = pd.DataFrame(val)
        if isinstance(val, pd.DataFrame) and {"step", "cost"} <= set(val.columns):
            return _curve_rows(val)
    candidates = []
    for attr in ("curve_path", "log_path", "learning_curve_path"):
        val = getattr(trained, attr, None)
        if val:
            candidates.append(Path(val))
    candidates += sorted(out_dir.rglob("*.csv"))
    for path in candidates:
        try:
            df = pd.read_csv(path)
        except (OSError, ValueError):
            continue
        if {"step", "cost"} <= set(df.columns):
            return _curve_rows(df)
    return None


def _curve_rows(df: Any) -> list[dict[str, float]]:
    """(step, cost, gap) rows; `gap` is a fraction in results (training logs keep `gap_pct`)."""
    if "gap" not in df.columns and "gap_pct" in df.columns:
        df = df.assign(gap=df["gap_pct"] / 100.0)
    cols = [c for c in ("step", "cost", "gap") if c in df.columns]
    return [{c: _num(r[c]) for c in cols} for _, r in df[cols].iterrows()]
