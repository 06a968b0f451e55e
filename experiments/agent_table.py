"""The agents' table of a suite run: for each agent, over the whole suite and per model family,
its gap to the certified optimum (mean, max, spread across seeds), how often it is worse than
the best classical policy of the instance, and how many of its cells are still missing.

Definitions (also printed under the table):
  gap           (cost - optimum) / optimum of one cell (instance, agent, seed), the results
                table's `gap`; exact when the cell's method is "exact" (exact evaluation of the
                trained policy), else simulated with a 95% CI.
  mean, max     over every finished cell of the agent (instances x seeds).
  seed range    per instance, the largest minus the smallest gap of its seeds; the table gives
                the mean and the max of that range over the instances with two or more seeds.
  seed sd       for each seed, the mean gap over the instances that every seed has finished;
                the sample standard deviation (n - 1) of those per-seed means: how much the
                headline mean gap moves from one seed to the next.
  worse than best classical
                a cell is worse when its cost exceeds the lowest cost of the instance's classical
                cells (same seed where there is one) by more than a tolerance: 1e-6 relative
                when both are exact (the solver's and evaluator's tolerance), else the 95%
                interval of a difference of two estimates, sqrt(ci_agent^2 + ci_best^2).
                Counted as instances with at least one worse seed, and as cells.
`agent_table(df, expected)` works on a results frame alone; `run_agent_table(DIR)` reads a
results folder and takes the expected cells from its suite, so a partial run shows what is missing.
"""
from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any, Iterable

import pandas as pd

from .tables import finite_or_zero

#: Relative tolerance for "worse" between two exact costs (the solver certifies to 1e-6).
EXACT_RTOL = 1e-6
ALL = "all"
DEFINITIONS = (
    "Gap = (cost - optimum) / optimum per cell (instance, agent, seed); exact when the trained policy "
    "was evaluated exactly, else simulated (95% CI). Mean and max: over every finished cell. "
    "Seed range: per instance, max - min of its seeds' gaps; mean / max over instances. "
    "Seed sd: sample standard deviation (n - 1) across seeds of the per-seed mean gap, over the "
    "instances that every seed has finished. Worse than best classical: cells whose cost exceeds the "
    "lowest classical cost of the instance by more than 1e-6 relative (both exact) or the 95% interval "
    "of the difference (simulated); given as instances with a worse seed (and cells).")


def family_of(model: str, random_lead_time: bool) -> str:
    """The family a row is reported under: the model, or "random lead time" for any model
    whose lead time is random (the suite's own family, lost sales and backorders alike)."""
    return "random lead time" if random_lead_time else str(model)


@dataclass
class AgentStats:
    """One row of the table: an agent over the suite (family "all") or over one family."""

    agent: str
    family: str
    expected: int  # cells the suite lists (the finished ones when unknown)
    done: int  # finished cells (with a gap once their instance's optimum is in)
    failed: int
    exact: int
    simulated: int
    mean_gap: float | None
    max_gap: float | None
    range_mean: float | None
    range_max: float | None
    seed_sd: float | None
    worse_instances: int
    worse_cells: int
    instances: int  # instances with at least one finished cell
    max_gap_ci: float  # the largest 95% CI half-width of a simulated gap (0 when all exact)

    @property
    def missing(self) -> int:
        return max(self.expected - self.done - self.failed, 0)

    def to_dict(self) -> dict[str, Any]:
        return {**asdict(self), "missing": self.missing}


@dataclass
class AgentTable:
    """Rows per agent (`overall`) and per (family, agent) (`by_family`), plus the best classical
    policy's gap per instance as a reference row, and notes on what is missing."""

    overall: list[AgentStats]
    by_family: list[AgentStats]
    classical: dict[str, tuple[float | None, float | None, int]]  # family -> (mean, max, instances)
    notes: list[str]

    def to_dict(self) -> dict[str, Any]:
        return {"overall": [r.to_dict() for r in self.overall],
                "by_family": [r.to_dict() for r in self.by_family],
                "best_classical": {f: {"mean_gap": m, "max_gap": x, "instances": n}
                                   for f, (m, x, n) in self.classical.items()},
                "notes": list(self.notes), "definitions": DEFINITIONS}

    def tables(self) -> list[tuple[list[str], list[list[str]]]]:
        """(head, rows) of the suite table and of the per-family table."""
        head = ["agent", "cells done", "exact / simulated", "mean gap", "max gap", "seed range mean / max",
                "seed sd", "worse than best classical"]
        top = [_row(r) for r in self.overall]
        if ALL in self.classical:
            top.append(_classical_row(self.classical[ALL]))
        fam = [[r.family, *_row(r)] for r in self.by_family]
        for f, v in self.classical.items():
            if f != ALL:
                fam.append([f, *_classical_row(v)])
        fam.sort(key=lambda r: r[0])  # stable: agents keep their order within a family
        return [(head, top), (["family", *head], fam)]

    def markdown(self, title: str = "") -> str:
        from .report import blocks_to_md  # late: the report module loads the plotting part

        return blocks_to_md(self.blocks(title))

    def blocks(self, title: str = "") -> list[tuple[str, Any]]:
        """Report blocks (see report.blocks_to_md): the two tables, definitions and notes."""
        top, fam = self.tables()
        out: list[tuple[str, Any]] = []
        if title:
            out.append(("h2", title))
        out += [("table", top), ("p", "Per model family:"), ("table", fam), ("p", DEFINITIONS)]
        out += [("p", n) for n in self.notes]
        return out


def _pct(v: float | None, digits: int = 2) -> str:
    return "" if v is None or not math.isfinite(v) else f"{round(100 * v, digits) + 0.0:.{digits}f}%"


def _row(r: AgentStats) -> list[str]:
    cells = f"{r.done}/{r.expected}" + (f" ({r.failed} failed)" if r.failed else "")
    rng = "" if r.range_mean is None else f"{_pct(r.range_mean)} / {_pct(r.range_max)}"
    worse = f"{r.worse_instances} of {r.instances} ({r.worse_cells} cell{'' if r.worse_cells == 1 else 's'})"
    return [r.agent, cells, f"{r.exact} / {r.simulated}", _pct(r.mean_gap), _pct(r.max_gap), rng,
            _pct(r.seed_sd), worse]


def _classical_row(v: tuple[float | None, float | None, int]) -> list[str]:
    mean, mx, n = v
    return ["best classical", f"{n} instances", "", _pct(mean), _pct(mx), "", "", ""]


def _ok(df: pd.DataFrame) -> pd.DataFrame:
    return df[df["status"].astype(str) == "ok"] if "status" in df.columns else df


def _families(df: pd.DataFrame) -> pd.Series:
    rnd = df["lead_time_pmf"].notna() if "lead_time_pmf" in df.columns else pd.Series(False, index=df.index)
    model = df["model"] if "model" in df.columns else pd.Series("", index=df.index)
    return pd.Series([family_of(m, bool(r)) for m, r in zip(model, rnd)], index=df.index, dtype=object)


def _best_classical(ok: pd.DataFrame) -> tuple[dict[tuple[str, int], Any], dict[str, Any]]:
    """The lowest-cost classical cell per (instance, seed) and per instance."""
    cl = ok[ok["kind"] == "classical"].dropna(subset=["cost"])
    per_seed, per_inst = {}, {}
    for (inst, seed), g in cl.groupby(["instance", "seed"]):
        per_seed[(inst, int(seed))] = g.loc[g["cost"].idxmin()]
    for inst, g in cl.groupby("instance"):
        per_inst[inst] = g.loc[g["cost"].idxmin()]
    return per_seed, per_inst


def _worse(r: Any, best: Any) -> bool:
    ci_a, ci_b = finite_or_zero(r["ci_halfwidth"]), finite_or_zero(best["ci_halfwidth"])
    if r["method"] == "exact" and best["method"] == "exact":
        tol = EXACT_RTOL * abs(float(best["cost"]))
    else:
        tol = math.hypot(ci_a, ci_b)
    return float(r["cost"]) - float(best["cost"]) > tol




def _stats(agent: str, fam: str, cells: pd.DataFrame, failed: int, expected: int, seeds: list[int],
           worse: pd.Series) -> AgentStats:
    g = cells.dropna(subset=["gap"])
    gaps = g["gap"].astype(float)
    by_inst = g.groupby("instance")["gap"]
    ranges = (by_inst.max() - by_inst.min())[by_inst.count() >= 2]
    seed_sd = None
    if len(seeds) >= 2:
        wide = g.pivot_table(index="instance", columns="seed", values="gap", aggfunc="first")
        wide = wide.reindex(columns=seeds).dropna()
        if len(wide):
            seed_sd = float(wide.mean(axis=0).std(ddof=1))
    worse_g = worse.reindex(cells.index).fillna(False).astype(bool)
    sim = g[g["method"] != "exact"]
    return AgentStats(
        agent=agent, family=fam, expected=max(expected, len(cells)), done=len(cells), failed=failed,
        exact=int((g["method"] == "exact").sum()), simulated=len(sim),
        mean_gap=float(gaps.mean()) if len(gaps) else None, max_gap=float(gaps.max()) if len(gaps) else None,
        range_mean=float(ranges.mean()) if len(ranges) else None,
        range_max=float(ranges.max()) if len(ranges) else None, seed_sd=seed_sd,
        worse_instances=int(cells.loc[worse_g, "instance"].nunique()), worse_cells=int(worse_g.sum()),
        instances=int(g["instance"].nunique()),
        max_gap_ci=float(sim["gap_ci"].astype(float).max()) if len(sim) and "gap_ci" in sim else 0.0)


def agent_table(df: pd.DataFrame, expected: Iterable[tuple[str, str, int, str]] | None = None) -> AgentTable:
    """The agents' table of a results frame (`results.csv` of `invbench bench`).

    expected: the agent cells the suite lists, as (instance, agent label, seed, family); then
    missing cells are counted and seeds come from the suite. Without it, the finished cells
    are taken as the whole run.
    """
    df = df.copy()
    df["family"] = _families(df)
    if "status" not in df.columns:
        df["status"] = "ok"
    exp = pd.DataFrame(list(expected or []), columns=["instance", "policy", "seed", "family"])
    agents_df = df[df["kind"] == "agent"]
    ok = _ok(df)
    per_seed, per_inst = _best_classical(ok)
    ok_agents = ok[ok["kind"] == "agent"].dropna(subset=["cost"])
    worse = pd.Series({i: _worse(r, per_seed.get((r["instance"], int(r["seed"])), per_inst.get(r["instance"])))
                       for i, r in ok_agents.iterrows() if r["instance"] in per_inst}, dtype=bool)
    labels = list(dict.fromkeys([*exp["policy"], *agents_df["policy"]]))
    overall, by_family = [], []
    families = list(dict.fromkeys([*exp["family"], *agents_df["family"]]))
    for agent in labels:
        e_a = exp[exp["policy"] == agent]
        seeds = sorted({int(s) for s in (e_a["seed"] if len(e_a) else agents_df.loc[agents_df["policy"] == agent, "seed"])})
        a_ok = ok_agents[ok_agents["policy"] == agent]
        a_failed = agents_df[(agents_df["policy"] == agent) & (agents_df["status"].astype(str) != "ok")]
        overall.append(_stats(agent, ALL, a_ok, len(a_failed), len(e_a), seeds, worse))
        for fam in families:
            f_ok = a_ok[a_ok["family"] == fam]
            f_exp = int((e_a["family"] == fam).sum())
            if len(f_ok) or f_exp:
                by_family.append(_stats(agent, fam, f_ok, int((a_failed["family"] == fam).sum()), f_exp, seeds, worse))
    classical = _classical_ref(ok)
    return AgentTable(overall, by_family, classical, _notes(df, exp, overall))


def _classical_ref(ok: pd.DataFrame) -> dict[str, tuple[float | None, float | None, int]]:
    """Per family and overall: mean and max over instances of the best classical policy's gap
    (per instance, the policy whose mean gap over seeds is lowest)."""
    cl = ok[(ok["kind"] == "classical")].dropna(subset=["gap"])
    if cl.empty:
        return {}
    best = cl.groupby(["instance", "policy"])["gap"].mean().groupby(level=0).min()
    fam = cl.groupby("instance")["family"].first()
    out = {ALL: (float(best.mean()), float(best.max()), len(best))}
    for f, g in best.groupby(fam.reindex(best.index)):
        out[str(f)] = (float(g.mean()), float(g.max()), len(g))
    return out


def _notes(df: pd.DataFrame, exp: pd.DataFrame, overall: list[AgentStats]) -> list[str]:
    notes = []
    missing = sum(r.missing for r in overall)
    failed = sum(r.failed for r in overall)
    total = sum(r.expected for r in overall)
    if missing or failed:
        notes.append(f"Partial run: {missing} of {total} agent cells not finished yet, {failed} failed "
                     f"(rerun `invbench bench` with the same suite and --out to resume).")
    ok = _ok(df)
    have_opt = set(ok.loc[ok["kind"] == "optimum", "instance"])
    insts = set(exp["instance"]) | set(df.loc[df["kind"] == "agent", "instance"])
    no_opt = sorted(insts - have_opt)
    if no_opt:
        notes.append(f"No optimum (yet) for {len(no_opt)} instance(s), so no gap there: {', '.join(no_opt[:10])}"
                     + (" ..." if len(no_opt) > 10 else ""))
    sims = [r for r in overall if r.simulated]
    if sims:
        notes.append("Simulated gaps (the trained policy's chain was too large or unstable for exact evaluation): "
                     + "; ".join(f"{r.agent} {r.simulated} cells, 95% CI up to ±{_pct(r.max_gap_ci)}" for r in sims)
                     + ". All other gaps are exact.")
    elif any(r.done for r in overall):
        notes.append("Every gap above is exact (trained policies evaluated exactly on the instance's chain).")
    return notes


def run_agent_table(root: str | Path) -> AgentTable:
    """The agents' table of a results folder, with the suite's agent cells as the expected ones."""
    from .store import ResultStore

    store = ResultStore(root)
    suite = store.suite()
    df = store.table(suite)
    expected = [(c.instance.label, c.policy.label, c.seed,
                 family_of(c.instance.model, c.instance.lead_time_law is not None))
                for c in suite.cells() if c.policy.kind == "agent"]
    return agent_table(df, expected)
