"""`invbench report DIR`: report.md, a self-contained report.html and the PNG figures.

The report is built once as a list of blocks (headings, paragraphs, tables, figures) and
rendered twice, to Markdown (figures linked) and to HTML (figures embedded as base64), so the
two never disagree. For papers, `formats` adds the figures as SVG and PDF and the summary
table as LaTeX (`summary.tex`, booktabs) and Markdown (`summary.md`).
"""
from __future__ import annotations

import base64
import html
import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from invbench.envs.errors import SpecError
from invbench.envs.models import MODEL_KEYS

from . import plots
from .store import ResultStore, atomic_write


#: Extra outputs `formats` may ask for: figures as svg / pdf, the summary table as tex / md.
REPORT_FORMATS = ("svg", "pdf", "tex", "md")
FIGURE_NAMES = ("gap", "gap_vs_lead_time", "learning_curves", "policy_map")
SUMMARY_NAMES = ("summary.tex", "summary.md")


def parse_formats(text: str | None, field: str = "--format") -> tuple[str, ...]:
    """"svg,pdf" -> ("svg", "pdf"); "all" -> every format; None or "" -> none."""
    if not text:
        return ()
    items = [t.strip().lower() for t in str(text).split(",") if t.strip()]
    if items == ["all"]:
        return REPORT_FORMATS
    bad = [t for t in items if t not in REPORT_FORMATS]
    if bad or not items:
        raise SpecError(f"{field}: must be a comma-separated list of {', '.join(REPORT_FORMATS)} (or all), "
                        f"got {text!r}")
    return tuple(dict.fromkeys(items))


def extra_files(formats: tuple[str, ...]) -> tuple[str, ...]:
    """Names of the files `formats` adds to a results folder (for the output check)."""
    figs = tuple(f"{n}.{f}" for n in FIGURE_NAMES for f in formats if f in ("svg", "pdf"))
    return figs + tuple(n for n in SUMMARY_NAMES if n.split(".")[1] in formats)


@dataclass
class ReportResult:
    md: Path
    html: Path
    pngs: list[Path] = field(default_factory=list)
    #: (original file, file in damaged/, reason) of cell files that could not be read
    unread: list[tuple[str, str, str]] = field(default_factory=list)
    #: figures in vector formats and the summary table as LaTeX / Markdown, when asked for
    extra: list[Path] = field(default_factory=list)

    def files(self) -> list[Path]:
        return [self.md, self.html, *self.pngs, *self.extra]

    def to_dict(self) -> dict[str, Any]:
        return {"md": str(self.md), "html": str(self.html), "pngs": [str(p) for p in self.pngs],
                "extra": [str(p) for p in self.extra], "unread": [list(u) for u in self.unread]}


def _pct(v: Any, digits: int = 2) -> str:
    # round first and add 0.0 so a gap of -1e-9 (within the solver's tolerance) shows as 0.000%
    return "" if v is None or pd.isna(v) else f"{round(100 * float(v), digits) + 0.0:.{digits}f}%"


def _num(v: Any, digits: int = 4) -> str:
    return "" if v is None or pd.isna(v) else f"{float(v):.{digits}f}"


def _params(txt: Any) -> str:
    try:
        d = json.loads(txt) if isinstance(txt, str) else {}
    except json.JSONDecodeError:
        return str(txt)
    return ", ".join(f"{k}={v}" for k, v in d.items())


def write_report(root: str | Path, formats: tuple[str, ...] = ()) -> ReportResult:
    """Rebuild the table from the cell files, draw the figures and write both report files;
    `formats` (see `parse_formats`) adds vector figures and the summary table for papers."""
    formats = parse_formats(",".join(formats), "formats") if formats else ()
    store = ResultStore(root)
    suite = store.suite()
    df = store.write_table(suite)
    records = {r["cell_id"]: r for r in store.records(suite.cells())}
    meta = store.metadata()
    root = store.root
    blocks: list[tuple[str, Any]] = []
    pngs: list[Path] = []

    def figure(p: Path | None, caption: str) -> None:
        if p is not None:
            pngs.append(p)
            blocks.append(("figure", (p.name, caption)))

    blocks.append(("h1", f"Benchmark report: {suite.name}"))
    if suite.description:
        blocks.append(("p", suite.description))
    if suite.invented:
        blocks.append(("p", "All instances in this suite are invented (a made-up bicycle-parts "
                            "wholesaler); they hold no real company's data."))
    unread = _unread(store, df)
    blocks.append(("p", _run_line(df, meta, len(suite.cells()), len(unread))))
    blocks.append(("p", "Gap = (cost - optimum) / optimum, with the optimum the certified exact "
                        "average cost per period. Exact cells carry no sampling error; simulated cells "
                        "give a 95% confidence interval (CI) from independent replications with common "
                        "random numbers across policies."))
    blocks.append(("h2", "Gap to the optimum"))
    figure(plots.gap_chart(df, root / "gap.png", suite.name, formats),
           "Gap to the optimum per instance and policy, with 95% CI whiskers.")
    blocks.append(("h2", "Summary by policy"))
    summary = _summary_table(df)
    blocks.append(("table", summary))
    if any(p.kind == "agent" for p in suite.policies):
        from .agent_table import run_agent_table  # the agents' table, as `invbench report DIR --agents`
        blocks.extend(run_agent_table(root).blocks("Agents against the optimum"))
    if suite.sweep == "lead_time":
        blocks.append(("h2", "Gap vs lead time"))
        figure(plots.gap_vs_lead_time(df, root / "gap_vs_lead_time.png", suite.name, formats),
               "How each policy's gap grows with the lead time.")
    curves, optimum = _curves(df, records)
    if curves:
        blocks.append(("h2", "Learning curves"))
        figure(plots.learning_curves(curves, optimum, root / "learning_curves.png", formats),
               "Cost of the greedy policy during training; dashed: the optimum.")
    pm = _policy_map(df, records)
    if pm is not None:
        inst, opt_map, other_map, label = pm
        blocks.append(("h2", "Policy map"))
        figure(plots.policy_map_chart(inst, opt_map, other_map, label, root / "policy_map.png", formats),
               f"Optimal order vs {label} on {inst}, over on-hand stock and pipeline total.")
    blocks.append(("h2", "Results per instance"))
    for inst, g in df.groupby("instance", sort=False):
        blocks.append(("h3", f"{inst}"))
        blocks.append(("p", _instance_line(g.iloc[0])))
        blocks.append(("table", _instance_table(g)))
    bad = df[df["status"] != "ok"]
    if not bad.empty:
        blocks.append(("h2", "Failed cells"))
        blocks.append(("table", (["instance", "policy", "seed", "error"],
                                 [[r.instance, r.policy, str(r.seed), str(r.error)] for r in bad.itertuples()])))
    if unread:
        blocks.append(("h2", "Cell files that could not be read"))
        blocks.append(("p", "These files were moved aside into damaged/; rerun `invbench bench` with "
                            "the same suite and folder to compute their cells again."))
        blocks.append(("table", (["file", "moved to", "problem"], [list(u) for u in unread])))
    md_path, html_path = root / "report.md", root / "report.html"
    atomic_write(md_path, blocks_to_md(blocks))
    atomic_write(html_path, blocks_to_html(blocks, root, suite.name))
    extra = [p.with_suffix(f".{f}") for p in pngs for f in formats if f in plots.FIGURE_FORMATS]
    if "md" in formats:
        atomic_write(root / "summary.md", f"Summary by policy: {suite.name}\n\n" + blocks_to_md([("table", summary)]))
        extra.append(root / "summary.md")
    if "tex" in formats:
        atomic_write(root / "summary.tex", _to_latex(summary, suite.name))
        extra.append(root / "summary.tex")
    return ReportResult(md_path, html_path, pngs, unread, extra)


def _unread(store: ResultStore, df: pd.DataFrame) -> list[tuple[str, str, str]]:
    """(original file, file in damaged/, reason) of damaged cell files not recomputed since."""
    have = set(df["cell_id"])
    out = []
    for moved, original, reason in store.damaged():
        if Path(original).stem not in have and (store.damaged_dir / moved).exists():
            out.append((original, f"damaged/{moved}", reason))
    return out


def _run_line(df: pd.DataFrame, meta: dict[str, Any], total: int, unread: int) -> str:
    inv = (meta.get("invocations") or [{}])[-1]
    git = meta.get("git") or {}
    commit = (git.get("commit") or "unknown")[:10] + (" (uncommitted changes)" if git.get("dirty") else "")
    versions = meta.get("versions") or {}
    mach = meta.get("machine") or {}
    n_ok = int((df["status"] == "ok").sum())
    head = f"{len(df)} of the suite's {total} cells ({n_ok} finished, {len(df) - n_ok} failed"
    head += f", {unread} cell file(s) could not be read, see below)" if unread else ")"
    return (f"{head}; last run {inv.get('finished', '?')} "
            f"on {mach.get('hostname', '?')} ({mach.get('cpu_count', '?')} CPUs), backend "
            f"{inv.get('backend', '?')}; invbench {versions.get('invbench', '?')}, git {commit}, "
            f"numpy {versions.get('numpy', '?')}, torch {versions.get('torch', '?')}.")


def _plain(v: Any) -> Any:
    """2.0 shown as 2 (a lead-time column holding random lead times' means is a float column)."""
    return f"{v:g}" if isinstance(v, float) else v


def _instance_line(r: Any) -> str:
    """The instance in words from its table row; fields its model does not use are empty there."""
    def given(v: Any) -> bool:
        return v is not None and not (isinstance(v, float) and math.isnan(v))

    parts = [f"model {r.model}"]
    for label, key, shown in (("lead time", "lead_time", True), ("demand", "demand", True),
                              ("holding", "holding_cost", True), ("shortage", "shortage_cost", True),
                              ("fixed order cost", "fixed_order_cost", bool(getattr(r, "fixed_order_cost", 0))),
                              ("unit order cost", "unit_order_cost", bool(getattr(r, "unit_order_cost", 0))),
                              ("case pack", "case_pack", getattr(r, "case_pack", 1) != 1)):
        v = getattr(r, key, None)
        pmf = getattr(r, "lead_time_pmf", None)
        if key == "lead_time" and isinstance(pmf, str) and pmf:  # random: its pmf and mean
            v = f"{pmf} (mean {_plain(r.lead_time)})"
        if given(v) and shown:
            parts.append(f"{label} {v:g}" if isinstance(v, float) else f"{label} {v}")
    for key in MODEL_KEYS:  # the model's own keys (stage lead times, shelf life, ...)
        v = getattr(r, key, None)
        if given(v):
            parts.append(f"{key.replace('_', ' ')} {v}")
    return ", ".join(parts) + "."


def _instance_table(g: pd.DataFrame) -> tuple[list[str], list[list[str]]]:
    head = ["policy", "parameters", "seed", "cost per period", "± 95% CI", "gap", "method", "seconds"]
    rows = []
    for r in g.itertuples():
        if r.status != "ok":
            rows.append([r.policy, "", str(r.seed), "failed", "", "", "", _num(r.wall_seconds, 1)])
            continue
        ci = "" if r.method == "exact" else _num(r.ci_halfwidth)  # exact: no sampling error
        rows.append([r.policy, _params(r.params), str(r.seed), _num(r.cost), ci,
                     _pct(r.gap, 3), str(r.method), _num(r.wall_seconds, 1)])
    return head, rows


def _summary_table(df: pd.DataFrame) -> tuple[list[str], list[list[str]]]:
    ok = df[(df["status"] == "ok") & (df["kind"] != "optimum")]
    head = ["policy", "cells", "mean gap", "max gap", "exact cells", "simulated cells"]
    rows = []
    for pol, g in ok.groupby("policy", sort=False):
        gaps = g["gap"].dropna()
        rows.append([pol, str(len(g)), _pct(gaps.mean()) if len(gaps) else "",
                     _pct(gaps.max()) if len(gaps) else "", str(int((g["method"] == "exact").sum())),
                     str(int((g["method"] == "simulated").sum()))])
    return head, rows


def _curves(df: pd.DataFrame, records: dict[str, Any]) -> tuple[list[dict[str, Any]], dict[str, float]]:
    optimum = {r.instance: r.optimum for r in df.itertuples() if pd.notna(r.optimum)}
    curves = []
    for r in records.values():
        rows = (r.get("extras") or {}).get("learning_curve")
        if r.get("status") == "ok" and rows:
            curves.append({"instance": r["instance"], "policy": r["policy"], "seed": r["seed"], "rows": rows})
    return curves, optimum


def _policy_map(df: pd.DataFrame, records: dict[str, Any]) -> tuple[str, dict, dict, str] | None:
    """First lost-sales instance with an optimal map and a learned one (else the best classical)."""
    maps: dict[str, dict[str, Any]] = {}
    for r in records.values():
        m = (r.get("extras") or {}).get("policy_map")
        if r.get("status") == "ok" and m:
            maps.setdefault(r["instance"], {})[r["cell_id"]] = (r, m)
    gaps = {r.cell_id: r.gap for r in df.itertuples()}
    for inst, cells in maps.items():
        opt = [m for r, m in cells.values() if r["kind"] == "optimum"]
        if not opt:
            continue
        learned = [(r, m) for r, m in cells.values() if r["kind"] == "agent"]
        if learned:
            r, m = learned[0]
            return inst, opt[0], m, r["policy"]
        others = [(gaps.get(cid), r, m) for cid, (r, m) in cells.items()
                  if r["kind"] != "optimum" and gaps.get(cid) is not None and pd.notna(gaps.get(cid))]
        if others:
            _, r, m = min(others, key=lambda t: t[0])
            return inst, opt[0], m, r["policy"]
    return None


# ---------------------------------------------------------------------------- rendering
def _to_latex(table: tuple[list[str], list[list[str]]], suite: str) -> str:
    """A booktabs table (needs \\usepackage{booktabs}); text is escaped for LaTeX by pandas."""
    head, rows = table
    df = pd.DataFrame(rows, columns=head)
    body = df.to_latex(index=False, escape=True, column_format="l" + "r" * (len(head) - 1),
                       caption=f"Gap to the certified optimum by policy ({suite}).",
                       label=f"tab:{suite.replace(' ', '-')}-summary")
    return f"% written by invbench report; needs \\usepackage{{booktabs}}\n{body}"



def blocks_to_md(blocks: list[tuple[str, Any]]) -> str:
    """Markdown from (kind, value) blocks; shared by the reports."""
    out = []
    for kind, val in blocks:
        if kind in ("h1", "h2", "h3"):
            out.append("#" * int(kind[1]) + " " + val)
        elif kind == "p":
            out.append(val)
        elif kind == "figure":
            name, caption = val
            out.append(f"![{caption}]({name})\n\n*{caption}*")
        elif kind == "table":
            head, rows = val
            cell = lambda s: str(s).replace("|", "\\|")  # noqa: E731
            out.append("| " + " | ".join(head) + " |\n|" + "---|" * len(head) + "\n"
                       + "\n".join("| " + " | ".join(cell(c) for c in r) + " |" for r in rows))
        out.append("")
    return "\n".join(out)


_CSS = """body{font-family:system-ui,-apple-system,Segoe UI,sans-serif;max-width:1200px;margin:2em auto;
padding:0 1em;color:#222;line-height:1.45}table{border-collapse:collapse;margin:.6em 0 1.2em;font-size:.9em}
th,td{border:1px solid #ccc;padding:.25em .6em;text-align:right}th{background:#eef2f6}
td:first-child,td:nth-child(2),th:first-child,th:nth-child(2){text-align:left}
figure{margin:1em 0}figure img{max-width:100%;border:1px solid #ddd}figcaption{color:#555;font-size:.9em}
h1{border-bottom:2px solid #446}h2{margin-top:1.6em;border-bottom:1px solid #ccd}"""

# Marks the page once every image has decoded, so a headless browser check can read it from the DOM.
_SCRIPT = """window.addEventListener('load',function(){var im=document.images,n=0;
for(var i=0;i<im.length;i++){if(im[i].complete&&im[i].naturalWidth>0)n++;}
document.body.setAttribute('data-images-loaded',n+'/'+im.length);});"""


def blocks_to_html(blocks: list[tuple[str, Any]], root: Path, title: str, kind: str = "report") -> str:
    """A self-contained page (figures inlined) from (kind, value) blocks; shared by the reports."""
    e = html.escape
    out = ["<!DOCTYPE html>", "<html lang=\"en\"><head><meta charset=\"utf-8\">",
           f"<title>invbench {e(kind)}: {e(title)}</title><style>{_CSS}</style></head><body>"]
    for kind, val in blocks:
        if kind in ("h1", "h2", "h3"):
            out.append(f"<{kind}>{e(val)}</{kind}>")
        elif kind == "p":
            out.append(f"<p>{e(val)}</p>")
        elif kind == "figure":
            name, caption = val
            data = base64.b64encode((root / name).read_bytes()).decode()
            out.append(f"<figure><img src=\"data:image/png;base64,{data}\" alt=\"{e(caption)}\">"
                       f"<figcaption>{e(caption)}</figcaption></figure>")
        elif kind == "table":
            head, rows = val
            out.append("<table><thead><tr>" + "".join(f"<th>{e(h)}</th>" for h in head) + "</tr></thead><tbody>"
                       + "".join("<tr>" + "".join(f"<td>{e(str(c))}</td>" for c in r) + "</tr>" for r in rows)
                       + "</tbody></table>")
    out.append(f"<script>{_SCRIPT}</script></body></html>")
    return "\n".join(out)
