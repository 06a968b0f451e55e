"""The console summary of a portfolio run: the same size for 10 items or 10,000 — totals, a
text histogram of the gaps, the worst items, the policies chosen and the robustness per
alternative — instead of one line per cell (those go to the stage's cells.log).
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd

#: Gap bins in percent (upper edges); the last bin is open.
GAP_EDGES_PCT = (0.0, 0.1, 0.5, 1.0, 2.0, 5.0, 10.0)
BAR_WIDTH = 40


def pct(v: Any, digits: int = 2) -> str:
    return "-" if v is None or (isinstance(v, float) and not math.isfinite(v)) or pd.isna(v) else \
        f"{round(100 * float(v), digits) + 0.0:.{digits}f}%"


def gap_bins(gaps: pd.Series) -> list[tuple[str, int]]:
    """(label, count) for the gaps (fractions) in the fixed bins of `GAP_EDGES_PCT`."""
    g = 100 * gaps.dropna().to_numpy(float)
    g = np.where(np.abs(g) < 1e-4, 0.0, g)  # within the solver's tolerance: no gap
    out = [("0", int((g <= 0).sum()))]
    for lo, hi in zip(GAP_EDGES_PCT[:-1], GAP_EDGES_PCT[1:]):
        out.append((f"{lo:g}-{hi:g}%", int(((g > lo) & (g <= hi)).sum())))
    out.append((f"> {GAP_EDGES_PCT[-1]:g}%", int((g > GAP_EDGES_PCT[-1]).sum())))
    return out


def histogram_lines(bins: list[tuple[str, int]]) -> list[str]:
    top = max([c for _, c in bins] + [1])
    w = max(len(label) for label, _ in bins)
    return [f"  {label:>{w}} | {'#' * math.ceil(BAR_WIDTH * c / top) if c else '':<{BAR_WIDTH}} {c}" for label, c in bins]


def regret_stats(robust: pd.DataFrame) -> pd.DataFrame:
    """Per alternative: cases measured, mean, median, 90th percentile and largest relative
    regret, and the item with the largest."""
    ok = robust[robust["status"] == "ok"] if len(robust) else robust
    rows = []
    for kind, g in (ok.groupby("alternative", sort=False) if len(ok) else []):
        r = g["regret_rel"].dropna()
        worst = g.loc[r.idxmax()] if len(r) else None
        rows.append({"alternative": kind, "cases": len(g), "items": g["item"].nunique(),
                     "mean": r.mean(), "median": r.median(), "p90": r.quantile(0.9), "max": r.max(),
                     "worst_item": worst["item"] if worst is not None else "",
                     "regret_total": g["regret"].sum()})
    return pd.DataFrame(rows)


def totals(choice: pd.DataFrame) -> dict[str, Any]:
    ok = choice[choice["status"] == "ok"]
    both = ok[ok["optimum"].notna()]
    opt_total, cost_on_opt = float(both["optimum"].sum()), float(both["cost"].sum())
    return {"items": len(choice), "chosen": len(ok), "failed": len(choice) - len(ok),
            "with_optimum": int(choice["optimum"].notna().sum()),
            "cost_total": float(ok["cost"].sum()), "optimum_total": opt_total,
            "cost_total_where_optimum": cost_on_opt,
            "gap_total": (cost_on_opt - opt_total) / opt_total if opt_total > 0 else None,
            "policies": ok["policy"].value_counts().to_dict()}


def _table(head: list[str], rows: list[list[str]]) -> list[str]:
    w = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(head)]
    fmt = lambda r: "  " + "  ".join(c.ljust(w[i]) if i == 0 else c.rjust(w[i]) for i, c in enumerate(r)).rstrip()  # noqa: E731
    return [fmt(head)] + [fmt(r) for r in rows]


def worst_items(choice: pd.DataFrame, k: int) -> pd.DataFrame:
    ok = choice[(choice["status"] == "ok") & choice["gap"].notna()]
    return ok.sort_values("gap", ascending=False, kind="stable").head(k)


def summary_lines(res: Any, worst: int = 10) -> list[str]:
    """The whole console summary of a PortfolioResult."""
    ch = res.choice
    t = totals(ch)
    lines = [f"portfolio {res.name}: {t['items']} items, {t['chosen']} with a chosen policy, {t['failed']} without; "
             f"exact optimum for {t['with_optimum']} ({res.seconds:.1f}s, {res.seconds / max(t['items'], 1):.2f}s per item)"]
    for stage, d in res.stages.items():
        lines.append(f"  stage {stage}: {d['cells']} cells, {d['ran']} run now, {d['already_done']} already done, "
                     f"{len(d['failed'])} failed ({d['seconds']:.1f}s)")
    lines.append(f"total cost per period of the chosen policies: {t['cost_total']:.4f}")
    if t["optimum_total"] > 0:
        lines.append(f"  on the {t['with_optimum']} items with an optimum: {t['cost_total_where_optimum']:.4f} "
                     f"vs optimum {t['optimum_total']:.4f} (gap {pct(t['gap_total'])})")
    lines.append("policies chosen: " + ", ".join(f"{k} {v}" for k, v in t["policies"].items()))
    if ch["gap"].notna().any():
        lines.append("gap of the chosen policy to the optimum (items per bin):")
        lines += histogram_lines(gap_bins(ch["gap"]))
        w = worst_items(ch, worst)
        lines.append(f"worst {len(w)} items by gap:")
        lines += _table(["item", "policy", "parameters", "cost", "optimum", "gap"],
                        [[r.item, r.policy, _params(r.params), f"{r.cost:.4f}", f"{r.optimum:.4f}", pct(r.gap)]
                         for r in w.itertuples()])
    if len(res.robustness):
        lines.append("robustness: regret of the chosen policy on each alternative law, relative to that law's optimum")
        st = regret_stats(res.robustness)
        lines += _table(["alternative", "cases", "mean", "median", "p90", "max", "worst item"],
                        [[r.alternative, str(r.cases), pct(r.mean), pct(r.median), pct(r.p90), pct(r.max), r.worst_item]
                         for r in st.itertuples()])
        skipped = int((res.robustness["status"] != "ok").sum())
        if skipped:
            lines.append(f"  {skipped} alternative(s) not measured (optimum out of reach or failed; see robustness.csv)")
    for note in res.left_out:
        lines.append(f"note: {note}")
    noted = sum(1 for v in res.item_notes.values() if v)
    if noted:
        lines.append(f"note: {noted} item(s) carry notes (no optimum, an alternative left out); see summary.json")
    return lines


def _params(txt: Any) -> str:
    import json
    try:
        d = json.loads(txt)
    except (TypeError, ValueError):
        return ""
    return ", ".join(f"{k}={v:g}" if isinstance(v, float) else f"{k}={v}" for k, v in d.items()) or "-"
