"""The random-lead-time suite: its grid (same mean lead time, rising spread), which policies it
pairs with which instances, and a small run whose table and report carry the lead-time pmf."""
from __future__ import annotations

import numpy as np
import pandas as pd

from invbench.experiments.report import write_report
from invbench.experiments.runner import run_bench
from invbench.experiments.suite import load_suite, suite_from_dict


def test_suite_grid_and_pairing():
    s = load_suite("random-lead-time")
    assert {i.model for i in s.instances} == {"lost_sales", "backorder"}
    for i in s.instances:
        assert abs(i.mean_lead_time - 2.0) <= 1e-12  # one mean lead time ...
    spreads = sorted({round(i.lead_time_law.var, 9) if i.lead_time_law else 0.0 for i in s.instances})
    assert spreads == [0.0, 0.5, 1.0, 2.0]  # ... and a rising spread
    cells = s.cells()
    by_policy: dict[str, set[str]] = {}
    for c in cells:
        by_policy.setdefault(c.policy.label, set()).add(c.instance.lead_time_kind)
    assert by_policy["optimum"] == {"fixed", "in_sequence"}  # no optimum where orders may cross
    assert by_policy["myopic"] == {"fixed"}
    assert by_policy["base_stock"] == by_policy["pout"] == {"fixed", "in_sequence", "crossing"}
    assert "crossing" not in by_policy["capped_base_stock"] | by_policy["pil"]


def test_small_run_reports_gaps_and_the_lead_time_pmf(tmp_path):
    demand = {"distribution": "poisson", "mean": 1.5}
    suite = suite_from_dict({
        "suite": {"name": "rlt-small"},
        "evaluation": {"replications": 20, "periods": 400, "warmup": 50},
        "instances": [
            {"name": "seq", "model": "lost_sales", "lead_time": {"pmf": [0.3, 0.4, 0.3]}, "demand": demand},
            {"name": "cross", "model": "backorder", "lead_time": {"pmf": [0.3, 0.4, 0.3], "crossing": True},
             "demand": demand},
        ],
        "policies": [{"name": "optimum"}, {"name": "base_stock", "params": {"S": 5}}, {"name": "myopic"}],
    })
    run_bench(suite, tmp_path / "out", workers=1, progress=False)
    df = pd.read_csv(tmp_path / "out" / "results.csv")
    assert set(zip(df["instance"], df["policy"])) == {("seq", "optimum"), ("seq", "base_stock(S=5)"),
                                                     ("cross", "base_stock(S=5)")}
    assert (df["status"] == "ok").all()
    seq = df[(df.instance == "seq") & (df.policy == "base_stock(S=5)")].iloc[0]
    assert seq["method"] == "exact" and seq["gap"] >= 0 and seq["lead_time_pmf"] == "pmf(0.3,0.4,0.3)"
    cross = df[df.instance == "cross"].iloc[0]
    assert cross["method"] == "simulated" and np.isnan(cross["gap"]) and cross["lead_time"] == 1.0
    write_report(tmp_path / "out")
    text = (tmp_path / "out" / "report.md").read_text()
    assert "lead time pmf(0.3,0.4,0.3) crossing (mean 1)" in text and "lead time pmf(0.3,0.4,0.3) (mean 1)" in text
