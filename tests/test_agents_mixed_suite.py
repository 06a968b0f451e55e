"""The agents-mixed suites (experiments/suites/agents-mixed*.toml) and the agents' table
(experiments/agent_table.py, `invbench report DIR --agents`).

Checks: both suites load through the suite checks and cover every model family with the
features the issue asks for; every instance of agents-mixed is within the exact solver's
default budget by the solver's own size estimate (no solve); the table's mean / max / spread /
"worse than best classical" on a hand-made results frame whose values are worked out by hand
below (and the standard deviation cross-checked with Python's `statistics.stdev`); and a real
tiny run of part of the preview suite, whose table must agree with its results.csv and count a
missing cell after one cell file is removed.
"""
from __future__ import annotations

import statistics
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from invbench.agents.sb3_agents import check_agent_fits
from invbench.baselines.exact import DEFAULT_MAX_MEMORY_MB, DEFAULT_MAX_STATES, RVI_MAX_ITER, exact_space, expected_iterations
from invbench.baselines.mdp import check_budget
from invbench.baselines.split_mdp import split_estimate
from invbench.cli import main
from invbench.envs.errors import SpecError
from invbench.envs.spec import MODELS
from invbench.experiments.agent_table import agent_table, family_of, run_agent_table
from invbench.experiments.runner import run_bench
from invbench.experiments.suite import SUITES_DIR, load_suite, suite_from_dict

AGENTS = ("rollout", "ppo", "a2c", "dqn")


def _families(suite) -> set[str]:
    return {family_of(s.model, s.lead_time_law is not None) for s in suite.instances}


def test_suites_load_and_cover_every_family():
    full, preview = load_suite("agents-mixed"), load_suite("agents-mixed-preview")  # the suite checks run here
    assert len(full.instances) >= 30
    assert {s.model for s in full.instances} == set(MODELS)
    assert _families(preview) == _families(full)  # the preview has the same families
    ls = [s for s in full.instances if s.model == "lost_sales" and s.lead_time_law is None]
    assert {s.lead_time for s in ls} == {1, 2, 3, 4, 5}
    laws = {s.demand.distribution for s in ls}
    assert {"poisson", "geometric", "negative_binomial", "binomial"} <= laws
    assert any(s.demand.var > 2.5 * s.demand.mean for s in ls)  # high variance
    assert any(s.demand.var < 0.6 * s.demand.mean for s in ls)  # low variance
    assert any(s.case_pack > 1 for s in ls) and any(s.max_order is not None for s in ls)
    bo = [s for s in full.instances if s.model == "backorder" and s.lead_time_law is None]
    assert bo and all(s.fixed_order_cost > 0 for s in bo)
    assert all(not s.model_def.simulation_only(s) for s in full.instances)  # every one has an optimum cell
    assert full.invented and preview.invented


def test_agent_entries_and_where_each_agent_runs():
    full = load_suite("agents-mixed")
    agents = {p.label: p for p in full.policies if p.kind == "agent"}
    assert set(agents) == set(AGENTS)
    assert all(p.cpu_seconds == 300 and p.seeds == (0, 1, 2) for p in agents.values())
    cells = full.cells()
    names = {s.label for s in full.instances}
    for agent in AGENTS:
        on = {c.instance.label for c in cells if c.policy.label == agent}
        for spec in full.instances:
            try:  # the agents' own rule for which action spaces they can act on
                check_agent_fits(agent, spec)
                fits = True
            except SpecError:
                fits = False
            assert (spec.label in on) == fits, (agent, spec.label)
        assert agent == "dqn" or on == names
    for spec in full.instances:  # each instance has the optimum and at least one classical policy
        kinds = {c.policy.kind for c in cells if c.instance.label == spec.label}
        assert {"optimum", "classical", "agent"} <= kinds, spec.label


@pytest.mark.parametrize("suite", ["agents-mixed", "agents-mixed-preview"])
def test_every_instance_is_within_the_exact_solvers_budget(suite):
    # The same decisions `baselines.exact.solve` takes before it builds anything, at its defaults.
    for spec in load_suite(suite).instances:
        assert expected_iterations(spec) <= RVI_MAX_ITER, spec.label
        space = exact_space(spec)
        if getattr(space, "certified_solve", None) is not None:
            # serial: the Clark-Scarf decomposition, exact only without order caps (clark_scarf.py)
            assert spec.model == "serial" and dict(spec.extra).get("max_orders") is None, spec.label
            continue
        b = space.initial_bounds()
        est = split_estimate(space, b) if space.demand_split() is not None else space.estimate(b)
        check_budget(est, DEFAULT_MAX_STATES, int(DEFAULT_MAX_MEMORY_MB * 2**20))  # raises BudgetError when over


# ------------------------------------------------------------------ the table, by hand
def _hand_frame() -> pd.DataFrame:
    """Three instances: A (lost sales, optimum 10), B (backorder, optimum 20), C (perishable,
    optimum 5). Agent "ag": A costs 10.1 / 10.3 / 10.6 (gaps .01 .03 .06), B 20.0 / 20.4 / 20.1
    (gaps 0 .02 .005), C seed 0 simulated 5.15 +- 0.1 (gap .03), seed 1 not run, seed 2 failed.
    Best classical: A 10.5 (gap .05), B 20.2 (gap .01), C 5.1 (gap .02). D (serial): one agent
    cell finished, but no optimum and no classical cell yet, so no gap."""
    rows = []

    def add(inst, model, policy, kind, seed, cost, gap, method="exact", ci=0.0, status="ok"):
        rows.append(dict(instance=inst, model=model, lead_time_pmf=None, policy=policy, kind=kind, seed=seed,
                         cost=cost, gap=gap, method=method, ci_halfwidth=ci, gap_ci=ci / {"A": 10, "B": 20, "C": 5, "D": 1}[inst],
                         status=status))

    for inst, model, opt in (("A", "lost_sales", 10.0), ("B", "backorder", 20.0), ("C", "perishable", 5.0)):
        add(inst, model, "optimum", "optimum", 0, opt, 0.0)
    add("A", "lost_sales", "c1", "classical", 0, 10.5, 0.05)
    add("A", "lost_sales", "c2", "classical", 0, 11.0, 0.10)
    add("B", "backorder", "c1", "classical", 0, 20.2, 0.01)
    add("C", "perishable", "c1", "classical", 0, 5.1, 0.02)
    for seed, cost, gap in ((0, 10.1, 0.01), (1, 10.3, 0.03), (2, 10.6, 0.06)):
        add("A", "lost_sales", "ag", "agent", seed, cost, gap)
    for seed, cost, gap in ((0, 20.0, 0.0), (1, 20.4, 0.02), (2, 20.1, 0.005)):
        add("B", "backorder", "ag", "agent", seed, cost, gap)
    add("C", "perishable", "ag", "agent", 0, 5.15, 0.03, method="simulated", ci=0.1)
    add("C", "perishable", "ag", "agent", 2, None, None, method="", status="failed")
    add("D", "serial", "ag", "agent", 0, 7.0, None)
    return pd.DataFrame(rows)


def test_table_values_worked_out_by_hand():
    expected = [(i, "ag", s, m) for i, m in (("A", "lost_sales"), ("B", "backorder"), ("C", "perishable"))
                for s in (0, 1, 2)] + [("D", "ag", 0, "serial")]
    t = agent_table(_hand_frame(), expected)
    (ag,) = t.overall
    # 8 finished cells, 7 with a gap: .01 .03 .06 0 .02 .005 .03, sum .155 -> mean .155 / 7; max .06
    assert ag.done == 8 and ag.failed == 1 and ag.expected == 10 and ag.missing == 1
    assert ag.exact == 6 and ag.simulated == 1
    assert ag.mean_gap == pytest.approx(0.155 / 7) and ag.max_gap == pytest.approx(0.06)
    # seed range: A .06 - .01 = .05, B .02 - 0 = .02 (C has one seed): mean .035, max .05
    assert ag.range_mean == pytest.approx(0.035) and ag.range_max == pytest.approx(0.05)
    # seed sd over A and B (complete): per-seed means .005, .025, .0325; sample sd 0.0142156...
    assert ag.seed_sd == pytest.approx(0.0142156, abs=1e-7)
    assert ag.seed_sd == pytest.approx(statistics.stdev([0.005, 0.025, 0.0325]))
    # worse: A seed 2 (10.6 > 10.5), B seed 1 (20.4 > 20.2); C's 5.15 is within sqrt(0.1^2 + 0) of 5.1
    assert (ag.worse_instances, ag.worse_cells, ag.instances) == (2, 2, 3)
    fam = {r.family: r for r in t.by_family}
    a = fam["lost_sales"]  # A alone: gaps .01 .03 .06 -> mean .1/3, sd sqrt(.0012667/2) = .0251661
    assert a.mean_gap == pytest.approx(0.1 / 3) and a.seed_sd == pytest.approx(0.0251661, abs=1e-7)
    assert fam["perishable"].missing == 1 and fam["perishable"].failed == 1 and fam["perishable"].seed_sd is None
    # best classical per instance: .05, .01, .02 -> mean .08 / 3, max .05
    assert t.classical["all"][0] == pytest.approx(0.08 / 3) and t.classical["all"][1:] == (0.05, 3)
    md = t.markdown("Agents")
    assert "| ag | 8/10 (1 failed) | 6 / 1 | 2.21% | 6.00% | 3.50% / 5.00% | 1.42% | 2 of 3 (2 cells) |" in md
    assert "| best classical | 3 instances |  | 2.67% | 5.00% |" in md
    assert "Partial run: 1 of 10 agent cells not finished yet, 1 failed" in md
    assert "No optimum (yet) for 1 instance(s), so no gap there: D" in md
    assert "Simulated gaps" in md and "95% CI up to ±2.00%" in md


# ------------------------------------------------------------------ a real tiny run
def _tiny_preview() -> dict:
    """Two instances of the preview suite, two classical policies, rollout and dqn at 1 CPU-second."""
    data = tomllib.loads((SUITES_DIR / "agents-mixed-preview.toml").read_text())
    keep = {"ls-binom-cap4-L1-p19", "per-m2-L1-fifo"}
    data["instances"] = [i for i in data["instances"] if i["name"] in keep]
    pols = [p for p in data["policies"] if p.get("name") in ("optimum", "base_stock", "capped_base_stock")
            or p.get("agent") in ("rollout", "dqn")]
    for p in pols:
        if "agent" in p:
            p["cpu_seconds"] = 1
    data["policies"] = pols
    data["suite"]["name"] = "agents-mixed-tiny"
    return data


def test_table_of_a_real_tiny_run_and_the_cli(tmp_path, capsys):
    suite = suite_from_dict(_tiny_preview(), base_dir=SUITES_DIR)
    out = tmp_path / "run"
    res = run_bench(suite, out, workers=1, progress=False)
    assert not res.failed
    capsys.readouterr()  # the run's own lines
    df = pd.read_csv(out / "results.csv")
    t = run_agent_table(out)
    assert [r.agent for r in t.overall] == ["rollout", "dqn"]
    for r in t.overall:
        cells = df[df["policy"] == r.agent]
        assert r.done == r.expected == 4 and r.missing == 0  # 2 instances x seeds 0, 1
        assert r.mean_gap == pytest.approx(cells["gap"].mean()) and r.max_gap == pytest.approx(cells["gap"].max())
        rng = cells.groupby("instance")["gap"].agg(lambda g: g.max() - g.min())
        assert r.range_max == pytest.approx(rng.max())
        per_seed = cells.groupby("seed")["gap"].mean()
        assert r.seed_sd == pytest.approx(float(np.std(per_seed, ddof=1)))
        best = df[df["kind"] == "classical"].groupby("instance")["cost"].min()
        # small lost-sales and perishable chains: every cell is evaluated exactly, so "worse" is
        # a plain comparison with the best classical cost (within the 1e-6 relative tolerance)
        assert (cells["method"] == "exact").all() and (df.loc[df["kind"] == "classical", "method"] == "exact").all()
        worse = cells["cost"].to_numpy() > best.reindex(cells["instance"]).to_numpy() * (1 + 1e-6)
        assert r.worse_cells == int(worse.sum())
    assert main(["report", str(out), "--agents"]) == 0
    printed = capsys.readouterr().out
    assert printed == (out / "agents.md").read_text()
    assert "| rollout | 4/4 |" in printed and "Per model family:" in printed and "| perishable | dqn |" in printed
    assert main(["report", str(out), "--agents", "--format", "md"]) == 2  # --format is for the full report
    assert "--format:" in capsys.readouterr().err
    # a partial run: one agent cell file gone -> counted as missing, not as a zero
    gone = df[(df["policy"] == "dqn") & (df["seed"] == 1)].iloc[0]["cell_id"]
    Path(out / "cells" / f"{gone}.json").unlink()
    (dqn,) = [r for r in run_agent_table(out).overall if r.agent == "dqn"]
    assert (dqn.done, dqn.missing) == (3, 1)
    assert "Partial run: 1 of 8 agent cells not finished yet" in run_agent_table(out).markdown()
