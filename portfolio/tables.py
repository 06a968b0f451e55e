"""The two tables a portfolio run writes, built from the bench results tables of its stages:
the choice per item (policy, parameters, cost, gap; ready to feed a replenishment system) and
the robustness table (regret of that choice on each alternative law).
"""
from __future__ import annotations

import io
import json
from pathlib import Path
from typing import Any, Mapping, Sequence

import pandas as pd

from invbench.experiments.store import atomic_write

CHOICE_COLUMNS = ["item", "model", "lead_time", "holding_cost", "shortage_cost", "unit_order_cost",
                  "fixed_order_cost", "order_cap_units", "case_pack", "demand", "demand_mean", "demand_variance",
                  "policy", "params", "cost", "ci_halfwidth", "method", "optimum", "gap", "optimum_note",
                  "policies_tried", "agent", "agent_cost", "agent_gap", "status", "error"]
ROBUSTNESS_COLUMNS = ["item", "alternative", "replicate", "demand_a", "demand_b", "mean_b", "variance_b", "note",
                      "policy", "params", "cost_a", "cost_b", "ci_halfwidth", "method", "optimum_b", "regret",
                      "regret_rel", "status", "error"]


def _params(txt: Any) -> dict[str, Any]:
    try:
        d = json.loads(txt) if isinstance(txt, str) else {}
    except json.JSONDecodeError:
        return {}
    return d if isinstance(d, dict) else {}


def choice_table(specs: Sequence[Any], results: pd.DataFrame, no_optimum: Mapping[str, str]) -> pd.DataFrame:
    """One row per item: the cheapest classical policy (ties: the first tried) with its parameters,
    one `param_NAME` column per parameter, its gap to the optimum, and the agent if one ran."""
    groups = {k: g for k, g in results.groupby("instance", sort=False)} if len(results) else {}
    rows = []
    for spec in specs:
        item = spec.label
        g = groups.get(item, results.iloc[0:0])
        ok = g[g["status"] == "ok"]
        opt = ok[ok["kind"] == "optimum"]
        cls = ok[ok["kind"] == "classical"]
        agent = ok[ok["kind"] == "agent"]
        row: dict[str, Any] = {
            "item": item, "model": spec.model, "lead_time": spec.lead_time, "holding_cost": spec.holding_cost,
            "shortage_cost": spec.shortage_cost, "unit_order_cost": spec.unit_order_cost,
            "fixed_order_cost": spec.fixed_order_cost, "order_cap_units": spec.order_cap_units,
            "case_pack": spec.case_pack, "demand": spec.demand.describe(), "demand_mean": spec.demand.mean,
            "demand_variance": spec.demand.var,
            "policies_tried": " ".join(g[g["kind"] == "classical"]["policy"].astype(str)),
            "optimum": float(opt["cost"].iloc[0]) if len(opt) else None,
            "optimum_note": no_optimum.get(item) or ("" if len(opt) else _first_error(g, "optimum")),
        }
        if len(cls):
            best = cls.loc[cls["cost"].idxmin()]
            params = _params(best["params"])
            row.update(policy=best["policy"], params=json.dumps(params, sort_keys=True), cost=best["cost"],
                       ci_halfwidth=best["ci_halfwidth"], method=best["method"], status="ok", error="")
            row.update({f"param_{k}": v for k, v in params.items()})
        else:
            row.update(status="failed", error=_first_error(g, "classical") or "no classical policy finished")
        if len(agent):
            a = agent.loc[agent["cost"].idxmin()]
            row.update(agent=a["policy"], agent_cost=a["cost"])
        if row["optimum"] and row.get("cost") is not None:
            row["gap"] = (row["cost"] - row["optimum"]) / row["optimum"]
            if row.get("agent_cost") is not None:
                row["agent_gap"] = (row["agent_cost"] - row["optimum"]) / row["optimum"]
        rows.append(row)
    df = pd.DataFrame(rows)
    extra = sorted(c for c in df.columns if c.startswith("param_"))
    df = df.reindex(columns=CHOICE_COLUMNS[:14] + extra + CHOICE_COLUMNS[14:])
    for c in ("cost", "ci_halfwidth", "optimum", "gap", "agent_cost", "agent_gap", *extra):
        df[c] = pd.to_numeric(df[c], errors="coerce")
    return df


def _first_error(g: pd.DataFrame, kind: str) -> str:
    bad = g[(g["kind"] == kind) & (g["status"] != "ok")]
    return f"failed: {bad['error'].iloc[0]}" if len(bad) else ""


def robustness_table(alternatives: Sequence[Any], results: pd.DataFrame, choice: pd.DataFrame,
                     left_out: Mapping[str, str]) -> pd.DataFrame:
    """One row per alternative: the chosen policy's cost on B, B's optimum and the regret
    (cost on B minus B's optimum; `regret_rel` divides by B's optimum)."""
    by_inst = {k: g for k, g in results.groupby("instance", sort=False)} if len(results) else {}
    chosen = choice.set_index("item")
    rows = []
    for alt in alternatives:
        if alt.item not in chosen.index or chosen.loc[alt.item, "status"] != "ok":
            continue
        c = chosen.loc[alt.item]
        spec = alt.spec
        row: dict[str, Any] = {"item": alt.item, "alternative": alt.kind, "replicate": alt.replicate,
                               "demand_a": c["demand"], "demand_b": spec.demand.describe(), "mean_b": spec.demand.mean,
                               "variance_b": spec.demand.var, "note": alt.note, "policy": c["policy"],
                               "params": c["params"], "cost_a": c["cost"]}
        g = by_inst.get(spec.label)
        if spec.label in left_out or g is None:
            row.update(status="left out", error=left_out.get(spec.label, "not run"))
            rows.append(row)
            continue
        opt = g[(g["kind"] == "optimum") & (g["status"] == "ok")]
        mine = g[(g["kind"] == "custom") & (g["status"] == "ok")]
        if len(opt) and len(mine):
            cost, o = float(mine["cost"].iloc[0]), float(opt["cost"].iloc[0])
            row.update(cost_b=cost, ci_halfwidth=mine["ci_halfwidth"].iloc[0], method=mine["method"].iloc[0],
                       optimum_b=o, regret=cost - o, regret_rel=(cost - o) / o if o > 0 else None,
                       status="ok", error="")
        else:
            bad = g[g["status"] != "ok"]
            row.update(status="failed", error=str(bad["error"].iloc[0]) if len(bad) else "not finished")
        rows.append(row)
    df = pd.DataFrame(rows, columns=ROBUSTNESS_COLUMNS)
    for c in ("mean_b", "variance_b", "cost_a", "cost_b", "ci_halfwidth", "optimum_b", "regret", "regret_rel"):
        df[c] = pd.to_numeric(df[c], errors="coerce").astype("float64")
    return df


def write_table(df: pd.DataFrame, csv_path: Path) -> list[Path]:
    """CSV (and Parquet beside it when pyarrow is installed), each written atomically and read back."""
    atomic_write(csv_path, df.to_csv(index=False))
    back = pd.read_csv(csv_path, keep_default_na=False, dtype=str)
    if len(back) != len(df) or list(back.columns) != [str(c) for c in df.columns]:
        raise OSError(f"{csv_path} did not read back as written")
    written = [csv_path]
    try:
        import pyarrow  # noqa: F401
    except ImportError:
        return written
    buf = io.BytesIO()
    df.to_parquet(buf, index=False)
    pq = csv_path.with_suffix(".parquet")
    atomic_write(pq, buf.getvalue())
    written.append(pq)
    return written
