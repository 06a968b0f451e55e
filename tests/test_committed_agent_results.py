"""The committed `agents-mixed` results (experiments/results/agents-mixed): every cell file reads
back with its digest checked, the README's agents table is the one `invbench report --agents`
prints for that folder, and the committed trained policies reproduce their recorded cost.

A consistency check of what is committed, not a check of the method: the exact evaluator
itself is checked against published values in tests/reference/.
"""
from __future__ import annotations

from pathlib import Path

import pytest

import invbench
from invbench.baselines.policy_eval import evaluate_exact
from invbench.experiments.agent_table import run_agent_table
from invbench.experiments.cellfile import decode_cell
from invbench.experiments.store import ResultStore

ROOT = Path(__file__).resolve().parents[1]
RUN = ROOT / "experiments" / "results" / "agents-mixed"


def _agent_cells() -> list[dict]:
    return [r for r in (decode_cell(p) for p in sorted((RUN / "cells").glob("*.json"))) if r["kind"] == "agent"]


def test_every_cell_reads_back_and_points_at_its_committed_policy():
    recs = _agent_cells()
    assert recs
    for r in recs:
        assert r["extras"]["artefacts"] == f"agents/{r['cell_id']}"  # relative: the folder travels
        assert (RUN / r["extras"]["artefacts"] / "policy.json").is_file(), r["cell_id"]


def test_readme_carries_the_agents_table_of_the_committed_run():
    table = run_agent_table(RUN).markdown(f"Agents against the optimum: {ResultStore(RUN).suite().name}")
    rows = [line for line in table.splitlines() if line.startswith("| ") and "|---" not in line]
    overall = rows[:rows.index(next(r for r in rows[1:] if r.startswith("| family")))]
    readme = (ROOT / "README.md").read_text()
    missing = [line for line in overall if line not in readme]
    assert not missing, "README's agents table is out of date (rerun `invbench report DIR --agents`):\n" + "\n".join(missing)


def test_committed_policies_reproduce_their_recorded_cost():
    # every agent's cells on the smallest instance (exact evaluation in a fraction of a second)
    recs = [r for r in _agent_cells() if r["instance"] == "ls-pois-L1-p4" and r["method"] == "exact"]
    assert {r["policy_name"] for r in recs} >= {"rollout"}
    suite = ResultStore(RUN).suite()
    spec = next(s for s in suite.instances if s.label == "ls-pois-L1-p4")
    for r in recs:
        policy = invbench.load_policy(RUN / r["extras"]["artefacts"], spec)
        assert evaluate_exact(spec, policy).cost == pytest.approx(r["cost"], rel=1e-9), r["cell_id"]
