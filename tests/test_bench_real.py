"""The real cell kinds through the bench: certified optimum, classical policies, an RL agent."""
from __future__ import annotations

import json

import pandas as pd
import pytest

from invbench.experiments.runner import run_bench
from invbench.experiments.suite import load_suite
from tests.test_bench_helpers import instance, write_suite


@pytest.fixture(scope="module")
def table(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("real")
    insts = [instance("ls-L1-p4", "lost_sales", L=1, mean=5.0, p=4.0),
             instance("bo-L1-p9", "backorder", L=1, mean=5.0, p=9.0)]
    pols = [{"name": "optimum"}, {"name": "base_stock"}, {"name": "capped_base_stock"},
            {"name": "base_stock", "label": "base_stock S=3", "params": {"S": 3}}]
    res = run_bench(load_suite(write_suite(tmp / "real.toml", insts, pols, [0], name="real")),
                    tmp / "out", workers=2, progress=False)
    assert not res.failed, res.failed
    return res.table


def _row(df: pd.DataFrame, inst: str, policy: str) -> pd.Series:
    return df[(df["instance"] == inst) & (df["policy"] == policy)].iloc[0]


def test_optimum_cell_matches_the_published_value(table):
    # Zipkin (2008), lost sales, Poisson mean 5, h = 1, L = 1, p = 4: optimal cost 4.04 (from memory).
    r = _row(table, "ls-L1-p4", "optimum")
    assert r.method == "exact" and r.lower <= r.cost <= r.upper
    assert abs(r.cost - 4.04) <= 0.005


def test_base_stock_is_optimal_for_backorders_without_fixed_cost(table):
    # With backorders and no fixed order cost a base-stock policy is optimal (Zipkin 2000,
    # Foundations of Inventory Management, ch. 9; from memory): its gap must vanish.
    r = _row(table, "bo-L1-p9", "base_stock")
    assert r.method == "exact" and abs(r.gap) <= 2e-6
    S = json.loads(r.params)["S"]
    assert isinstance(S, int)


def test_gaps_are_joined_from_the_optimum_and_nonnegative(table):
    for inst in ("ls-L1-p4", "bo-L1-p9"):
        opt = _row(table, inst, "optimum").cost
        for pol in ("base_stock", "capped_base_stock", "base_stock S=3"):
            r = _row(table, inst, pol)
            assert r.optimum == opt
            assert r.gap == pytest.approx((r.cost - opt) / opt, rel=1e-12)
            assert r.gap >= -2e-6  # nothing beats the certified optimum beyond its tolerance
    # a badly chosen fixed level costs visibly more than the optimised one
    assert _row(table, "bo-L1-p9", "base_stock S=3").gap > 0.05
    assert json.loads(_row(table, "bo-L1-p9", "base_stock S=3").params) == {"S": 3}


@pytest.mark.slow
def test_agent_cell_trains_and_records_its_curve(tmp_path):
    insts = [instance("ls-L2", "lost_sales", L=2, mean=2.0, p=4.0)]
    pols = [{"name": "optimum"}, {"agent": "ppo", "steps": 2048, "settings": {"eval_every": 1024}}]
    path = write_suite(tmp_path / "agent.toml", insts, pols, [0], name="agent")
    res = run_bench(load_suite(path), tmp_path / "out", workers=1, progress=False)
    assert not res.failed, res.failed
    cell = next(p for p in (tmp_path / "out" / "cells").glob("*.json") if json.loads(p.read_text())["kind"] == "agent")
    rec = json.loads(cell.read_text())
    assert rec["cost"] >= _row(res.table, "ls-L2", "optimum").cost * (1 - 2e-6)
    curve = rec["extras"]["learning_curve"]
    assert curve and all({"step", "cost"} <= set(r) for r in curve)
    assert rec["extras"]["policy_map"]["orders"]  # lost sales with L = 2: a map is drawn
    assert (tmp_path / "out" / "agents" / rec["cell_id"] / "policy.json").is_file()
    # recorded relative to the results folder, so a copied or committed folder still finds it
    assert rec["extras"]["artefacts"] == f"agents/{rec['cell_id']}"
