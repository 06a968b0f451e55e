"""Plain-text tables of a results table, one per instance, for the end of `invbench bench`."""
from __future__ import annotations

import json
import math
from typing import Any

import pandas as pd


def _cell(v: Any, fmt: str) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return ""
    return format(v, fmt)


def _params(raw: Any) -> str:
    try:
        d = json.loads(raw) if isinstance(raw, str) else (raw or {})
    except json.JSONDecodeError:
        return str(raw)
    if not isinstance(d, dict):
        return str(d)
    return ", ".join(f"{k}={v}" for k, v in d.items() if k != "agent")


def format_tables(df: pd.DataFrame, width: int = 32) -> list[str]:
    """Lines: for each instance, policy | parameters | cost | 95% CI | gap | method."""
    lines: list[str] = []
    for inst, g in df.groupby("instance", sort=False):
        lines.append("")
        lines.append(f"== {inst}")
        lines.append(f"   {'policy':<18} {'parameters':<{width}} {'cost':>9} {'95% CI':>9} {'gap':>8}  method")
        for _, r in g.iterrows():
            if r.get("status", "ok") != "ok":
                lines.append(f"   {str(r['policy']):<18} failed: {str(r.get('error', ''))[:60]}")
                continue
            params = _params(r.get("params"))
            ci = "" if r.get("method") == "exact" else "+-" + _cell(r.get("ci_halfwidth"), ".3f")
            gap = r.get("gap")
            gap_txt = "" if gap is None or (isinstance(gap, float) and math.isnan(gap)) else f"{100 * gap + 0.0:.2f}%"
            gap_txt = gap_txt.replace("-0.00%", "0.00%")  # within the certified tolerance of zero
            lines.append(f"   {str(r['policy']):<18} {params[:width]:<{width}} {_cell(r.get('cost'), '9.4f'):>9} "
                         f"{ci:>9} {gap_txt:>8}  {r.get('method', '')}")
    return lines
