"""The portfolio report: report.md and a self-contained report.html (figures embedded), built
once as a list of blocks and rendered twice, with a robustness section. Every table in it is
bounded (totals, bins, the worst items), so it reads the same for 30 or 10,000 items.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from invbench.experiments.report import blocks_to_html, blocks_to_md
from invbench.experiments.store import atomic_write

from . import plots
from .summary import _params, gap_bins, pct, regret_stats, totals, worst_items

REPORT_FILES = ("report.md", "report.html", "gap_histogram.png", "regret.png")
WORST = 20


@dataclass
class PortfolioReport:
    md: Path
    html: Path
    pngs: list[Path] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        return {"md": str(self.md), "html": str(self.html), "pngs": [str(p) for p in self.pngs]}


def write_report(res: Any) -> PortfolioReport:
    """Write the report of a PortfolioResult into its folder."""
    out = Path(res.out)
    blocks: list[tuple[str, Any]] = []
    pngs: list[Path] = []

    def figure(p: Path | None, caption: str) -> None:
        if p is not None:
            pngs.append(p)
            blocks.append(("figure", (p.name, caption)))

    ch, t = res.choice, totals(res.choice)
    blocks.append(("h1", f"Portfolio report: {res.name}"))
    blocks.append(("p", f"{t['items']} items; for each, the exact optimum where tractable (state space up to "
                        f"{res.settings['max_states']:,} states) and every classical policy tried ("
                        f"{', '.join(res.policies)}), optimised; the cheapest is the chosen policy. "
                        f"Costs are per period (long-run average). Run time {res.seconds:.1f}s."))
    blocks.append(("h2", "Totals"))
    rows = [["items", str(t["items"])], ["items with a chosen policy", str(t["chosen"])],
            ["items with an exact optimum", str(t["with_optimum"])],
            ["total cost per period, chosen policies", f"{t['cost_total']:.4f}"]]
    if t["optimum_total"] > 0:
        rows += [["same, on the items with an optimum", f"{t['cost_total_where_optimum']:.4f}"],
                 ["total optimal cost per period", f"{t['optimum_total']:.4f}"],
                 ["gap of the total", pct(t["gap_total"], 3)]]
    blocks.append(("table", (["", "value"], rows)))
    if ch["gap"].notna().any():
        blocks.append(("h2", "Gap to the optimum"))
        figure(plots.gap_histogram(ch, out / "gap_histogram.png", res.name),
               "Items per gap bin; gap = (cost of the chosen policy - optimum) / optimum.")
        blocks.append(("table", (["gap", "items"], [[b, str(c)] for b, c in gap_bins(ch["gap"])])))
    blocks.append(("h2", "Policies chosen"))
    ok = ch[ch["status"] == "ok"]
    blocks.append(("table", (["policy", "items", "mean gap", "max gap"],
                             [[p, str(len(g)), pct(g["gap"].mean()), pct(g["gap"].max())]
                              for p, g in ok.groupby("policy", sort=False)])))
    w = worst_items(ch, WORST)
    if len(w):
        blocks.append(("h2", f"The {len(w)} items with the largest gap"))
        blocks.append(("table", (["item", "demand", "lead time", "policy", "parameters", "cost", "optimum", "gap"],
                                 [[r.item, r.demand, str(r.lead_time), r.policy, _params(r.params), f"{r.cost:.4f}",
                                   f"{r.optimum:.4f}", pct(r.gap, 3)] for r in w.itertuples()])))
    bad = ch[ch["status"] != "ok"]
    if len(bad):
        blocks.append(("h2", "Items without a chosen policy"))
        blocks.append(("table", (["item", "problem"], [[r.item, str(r.error)] for r in bad.head(WORST).itertuples()])))
    _robustness(blocks, res, figure)
    blocks.append(("p", "The per-item table (policy, parameters, cost, gap) is portfolio.csv; the regret of every "
                        "alternative is robustness.csv; per-cell results are in choice/ and robustness/."))
    md, page = out / "report.md", out / "report.html"
    atomic_write(md, blocks_to_md(blocks))
    atomic_write(page, blocks_to_html(blocks, out, res.name, kind="portfolio"))
    return PortfolioReport(md, page, pngs)


def _robustness(blocks: list[tuple[str, Any]], res: Any, figure: Any) -> None:
    blocks.append(("h2", "Robustness: what if the demand model is wrong?"))
    s = res.settings
    blocks.append(("p", "Each item's chosen policy was optimised on its demand law (model A). Here it is measured "
                        "on alternative laws B, all else equal, and compared with B's own optimum: the regret is "
                        "(cost of A's policy under B - optimal cost under B) / optimal cost under B. Alternatives: "
                        f"wider = the same mean with {s['variance_factor']:g} times the variance (negative binomial); "
                        "other_family = the best other family (by AIC) fitted to the same sales history; "
                        f"bootstrap = A's family refitted to {s['bootstrap']} bootstrap resample(s) of the item's own "
                        "days (with their stock-out flags)."))
    for note in res.left_out:
        blocks.append(("p", f"Not covered: {note}."))
    rb = res.robustness
    if not len(rb):
        blocks.append(("p", "No alternative was measured (robustness off, or no item had a chosen policy)."))
        return
    st = regret_stats(rb)
    blocks.append(("table", (["alternative", "cases", "items", "mean regret", "median", "90th percentile", "max",
                              "item with the max"],
                             [[r.alternative, str(r.cases), str(r.items), pct(r.mean, 3), pct(r.median, 3),
                               pct(r.p90, 3), pct(r.max, 3), r.worst_item] for r in st.itertuples()])))
    figure(plots.regret_chart(rb, res.out / "regret.png", res.name),
           "Regret per alternative law: box 25-75 %, whiskers 5-95 %, points beyond.")
    okr = rb[rb["status"] == "ok"].sort_values("regret_rel", ascending=False, kind="stable").head(WORST)
    blocks.append(("h3", f"The {len(okr)} largest regrets"))
    blocks.append(("table", (["item", "alternative", "law A", "law B", "policy", "parameters", "cost under B",
                              "optimum under B", "regret"],
                             [[r.item, r.alternative + (f" {r.replicate}" if r.replicate else ""), r.demand_a,
                               r.demand_b, r.policy, _params(r.params), f"{r.cost_b:.4f}", f"{r.optimum_b:.4f}",
                               pct(r.regret_rel, 3)] for r in okr.itertuples()])))
    skipped = rb[rb["status"] != "ok"]
    if len(skipped):
        blocks.append(("p", f"{len(skipped)} alternative(s) could not be measured (first: {skipped['item'].iloc[0]} "
                            f"{skipped['alternative'].iloc[0]}: {skipped['error'].iloc[0]})."))


