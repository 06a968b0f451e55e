"""Custom policies in a suite: imported from the suite's folder, an edit of the policy file
reruns that policy's cells and only those, and a failure of an older version no longer shows."""
from __future__ import annotations

import sys

import pandas as pd
import pytest

from invbench.experiments.runner import run_bench
from invbench.experiments.store import ResultStore
from invbench.experiments.suite import load_suite

from .test_custom_policy import readme_example

SUITE = '''[suite]
name = "mine"
[evaluation]
method = "exact"
[[instances]]
name = "ls"
model = "lost_sales"
lead_time = 2
shortage_cost = 9.0
demand = {{ distribution = "poisson", mean = 4.0 }}
[[policies]]
name = "base_stock"
params = {{ S = 12 }}
[[policies]]
function = "{function}"
params = {{ S = 12 }}
label = "mine"
'''


@pytest.fixture()
def suite_dir(tmp_path, monkeypatch):
    d = tmp_path / "suite"
    d.mkdir()
    (d / "my_policy.py").write_text(readme_example())
    monkeypatch.chdir(tmp_path)  # not the suite's folder: the import must not depend on the cwd
    monkeypatch.setattr(sys, "path", [p for p in sys.path if p not in ("", ".")])
    sys.modules.pop("my_policy", None)
    yield d
    sys.modules.pop("my_policy", None)


def _run(suite_dir, out, function="my_policy:order_up_to"):
    (suite_dir / "s.toml").write_text(SUITE.format(function=function))
    return run_bench(load_suite(suite_dir / "s.toml"), out, workers=1, progress=False)


def test_edit_of_the_policy_reruns_that_cell_only(suite_dir, tmp_path, capsys):
    out = tmp_path / "out"
    first = _run(suite_dir, out)
    assert first.ran == 2 and not first.failed
    table = pd.read_csv(out / "results.csv")
    # Reference: the built-in base_stock policy with the same S gives the same exact cost.
    assert table.loc[table.policy == "mine", "cost"].item() == pytest.approx(
        table.loc[table.policy == "base_stock(S=12)", "cost"].item(), rel=1e-12)
    assert _run(suite_dir, out).ran == 0  # nothing changed: all done
    src = (suite_dir / "my_policy.py").read_text()
    (suite_dir / "my_policy.py").write_text(src.replace("int(params[\"S\"])", "int(params[\"S\"]) + 1"))
    again = _run(suite_dir, out)
    assert again.already_done == 1 and again.ran == 1  # the custom cell only
    table = pd.read_csv(out / "results.csv")
    assert len(table) == 2
    # S = 13 now: not the cost of base_stock(S=12) any more
    assert table.loc[table.policy == "mine", "cost"].item() != pytest.approx(
        table.loc[table.policy == "base_stock(S=12)", "cost"].item(), rel=1e-9)
    # the results folder's copy of the suite still names the cells that were run
    assert {c.cell_id for c in ResultStore(out).suite().cells()} == set(table.cell_id)


def test_failed_cell_is_one_line_and_its_record_goes_once_fixed(suite_dir, tmp_path):
    out = tmp_path / "out"
    res = _run(suite_dir, out, function="my_policy:no_such_factory")
    assert res.ran == 2 and len(res.failed) == 1
    assert "function" in res.failed[0] and "no_such_factory" in res.failed[0] and "\n" not in res.failed[0]
    assert len(list((out / "failed").glob("*.json"))) == 1
    # the user adds the factory: the suite's key for that cell changes, it reruns and passes
    with open(suite_dir / "my_policy.py", "a") as f:
        f.write("no_such_factory = order_up_to\n")
    res = _run(suite_dir, out, function="my_policy:no_such_factory")
    assert res.ran == 1 and not res.failed
    assert list((out / "failed").glob("*.json")) == []
    table = pd.read_csv(out / "results.csv")
    assert list(table.status) == ["ok", "ok"]


def test_search_in_a_suite_without_params(suite_dir, tmp_path):
    text = SUITE.format(function="my_policy.py:order_up_to").replace("params = { S = 12 }\n", "")
    (suite_dir / "s.toml").write_text(text)
    out = tmp_path / "out"
    res = run_bench(load_suite(suite_dir / "s.toml"), out, workers=1, progress=False)
    assert not res.failed
    table = pd.read_csv(out / "results.csv").set_index("policy")
    # Reference: the built-in base_stock's own optimisation (outside the custom-policy code).
    assert table.loc["mine", "params"] == table.loc["base_stock", "params"] == '{"S": 15}'
    assert table.loc["mine", "cost"] == pytest.approx(table.loc["base_stock", "cost"], rel=1e-12)


def test_two_suites_with_namesake_modules_each_get_their_own(tmp_path, monkeypatch):
    monkeypatch.setattr(sys, "path", [p for p in sys.path if p not in ("", ".")])
    costs = []
    for S in (10, 14):
        d = tmp_path / f"s{S}"
        d.mkdir()
        (d / "my_policy.py").write_text(readme_example().replace('int(params["S"])', str(S)))
        (d / "s.toml").write_text(SUITE.format(function="my_policy:order_up_to"))
        res = run_bench(load_suite(d / "s.toml"), d / "out", workers=1, progress=False)
        assert not res.failed
        costs.append(res.table.set_index("policy").loc["mine", "cost"])
    sys.modules.pop("my_policy", None)
    assert costs[0] != pytest.approx(costs[1], rel=1e-9)
