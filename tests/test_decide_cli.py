"""`invbench solve --save`, `evaluate --save` and `invbench decide`: orders from saved policies on
the command line, one state or a CSV batch; bad input is one line and exit code 2.

Outside reference for the orders: a base-stock policy orders (S - inventory position)^+
(common practice), checked by hand below; the table's orders are compared with the policy
object the solver returned.
"""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

import invbench
from invbench.cli import main

SPEC_TOML = """
[instance]
name = "bike-chain-L2"   # invented instance
model = "lost_sales"
lead_time = 2
shortage_cost = 9.0
[instance.demand]
distribution = "poisson"
mean = 3.0
"""


@pytest.fixture(scope="module")
def saved(tmp_path_factory):
    d = tmp_path_factory.mktemp("decide")
    spec_file = d / "inst.toml"
    spec_file.write_text(SPEC_TOML)
    assert main(["solve", str(spec_file), "--save", str(d / "opt"), "--table", str(d / "t.csv")]) == 0
    assert main(["evaluate", str(spec_file), "--policy", "base_stock", "--param", "S=11", "--save", str(d / "bs")]) == 0
    return d, spec_file


def _one_line_error(capsys, *needles):
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err, err
    for n in needles:
        assert n in err, err
    return err


def test_solve_save_holds_the_optimal_table(saved):
    d, spec_file = saved
    res = invbench.solve(invbench.load_spec(spec_file))
    back = invbench.load_policy(d / "opt", spec_file)
    np.testing.assert_array_equal(back.act(res.mdp.states), res.policy.act(res.mdp.states))
    df = pd.read_csv(d / "t.csv")
    assert len(df) == res.states


def test_evaluate_save_keeps_parameters_and_measurement(saved):
    d, _ = saved
    meta = json.loads((d / "bs" / "policy.json").read_text())
    assert meta["policy"] == {"name": "base_stock", "params": {"S": 11}}
    assert meta["measured"]["method"] == "exact" and meta["measured"]["cost"] > 0


def test_decide_one_state_and_several(saved, capsys):
    d, _ = saved
    assert main(["decide", str(d / "bs"), "--state", "4,3", "--state", "0,0"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out == ["state 4,3: order 4 units", "state 0,0: order 11 units"]  # 11 - 7 and 11 - 0
    assert main(["decide", str(d / "opt"), "--state", "4,6", "--json"]) == 0
    ans = json.loads(capsys.readouterr().out)
    want = int(invbench.load_policy(d / "opt").act(np.array([[4, 6]]))[0])
    assert ans["order"] == want and ans["orders"] == {"order": want} and ans["state"] == [4, 6]


def test_decide_batch_csv_keeps_other_columns(saved, tmp_path, capsys):
    d, _ = saved
    rng = np.random.default_rng(1)
    states = rng.integers(0, 9, size=(300, 2))
    src = pd.DataFrame({"item": [f"part-{i}" for i in range(300)], "state_0": states[:, 0], "state_1": states[:, 1]})
    src.to_csv(tmp_path / "states.csv", index=False)
    assert main(["decide", str(d / "opt"), "--input", str(tmp_path / "states.csv"),
                 "--output", str(tmp_path / "orders.csv")]) == 0
    out = pd.read_csv(tmp_path / "orders.csv")
    assert list(out.columns) == ["item", "state_0", "state_1", "order"]
    np.testing.assert_array_equal(out["order"].to_numpy(), invbench.load_policy(d / "opt").act(states))
    assert (out["item"] == src["item"]).all()


@pytest.mark.parametrize("state, needle", [
    ("4,-1", "--state[1]: must be a whole number of units in [0, 1000000000]"),
    ("4,2.5", "got 2.5"),
    ("4", "--state: must be a list of 2 whole numbers"),
    ("4,x", "got 'x'"),
    ("4,nan", "--state[1]"),
])
def test_decide_bad_states(saved, capsys, state, needle):
    d, _ = saved
    assert main(["decide", str(d / "opt"), "--state", state]) == 2
    _one_line_error(capsys, needle)


def test_decide_state_off_a_reachable_table_is_refused(tmp_path, saved, capsys):
    d, spec_file = saved
    assert main(["solve", str(spec_file), "--save", str(tmp_path / "reach"), "--states", "reachable"]) == 0
    capsys.readouterr()
    pol = invbench.load_policy(tmp_path / "reach")
    res = invbench.solve(invbench.load_spec(spec_file))
    off = [s for s in res.mdp.states if not np.isin(pol.index.codec.encode(s[None]), pol.index.keys).any()
           and s.sum() <= pol.bounds.upper]
    assert off, "every state reachable: no off-table state to try"
    s = ",".join(map(str, off[0]))
    assert main(["decide", str(tmp_path / "reach"), "--state", s]) == 2
    _one_line_error(capsys, f"--state {s}:", "not in the saved table")


def test_decide_csv_errors_name_row_and_column(saved, tmp_path, capsys):
    d, _ = saved
    (tmp_path / "bad.csv").write_text("item,state_0,state_1\na,1,2\nb,3,-4\n")
    assert main(["decide", str(d / "opt"), "--input", str(tmp_path / "bad.csv"), "--output", str(tmp_path / "o.csv")]) == 2
    _one_line_error(capsys, "row 3, column state_1", "got '-4'")
    assert not (tmp_path / "o.csv").exists()
    (tmp_path / "cols.csv").write_text("a,b\n1,2\n")
    assert main(["decide", str(d / "opt"), "--input", str(tmp_path / "cols.csv"), "--output", str(tmp_path / "o.csv")]) == 2
    _one_line_error(capsys, "needs the columns state_0, state_1")


def test_output_paths_checked_before_any_work(saved, tmp_path, capsys):
    d, spec_file = saved
    (tmp_path / "file").write_text("x")
    assert main(["solve", str(spec_file), "--save", str(tmp_path / "file")]) == 2
    _one_line_error(capsys, "--save:", "existing file")
    (tmp_path / "mine").mkdir()
    (tmp_path / "mine" / "notes.txt").write_text("keep")
    assert main(["evaluate", str(spec_file), "--policy", "base_stock", "--save", str(tmp_path / "mine")]) == 2
    _one_line_error(capsys, "--save:", "non-empty folder without a saved policy")
    assert main(["solve", str(spec_file), "--table", str(tmp_path / "t.xlsx")]) == 2
    _one_line_error(capsys, "--table:", ".csv or .parquet")
    assert main(["decide", str(d / "opt"), "--input", str(tmp_path / "file"), "--output", str(tmp_path / "o.txt")]) == 2
    _one_line_error(capsys, "--output:", "must end in .csv")
    assert main(["decide", str(d / "opt")]) == 2
    _one_line_error(capsys, "--state / --input")
    assert main(["decide", str(tmp_path / "nowhere"), "--state", "1,1"]) == 2
    _one_line_error(capsys, "is not a directory")
