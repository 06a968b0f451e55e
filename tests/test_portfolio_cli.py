"""`invbench portfolio` on the command line: the invented data set from sales to report in two
commands, resuming, damaged cells, a summary whose length does not grow with the items, and
bad input ending in one line on stderr with exit code 2."""
import json
from pathlib import Path

import pandas as pd
import pytest

from invbench.cli import main
from invbench.portfolio.summary import summary_lines

DATA = Path(__file__).resolve().parents[1] / "fitting" / "data"
ITEMS = ("item,model,lead_time,holding_cost,shortage_cost,demand,mean,variance\n"
         "chain,lost_sales,1,1,9,poisson,3,\n"
         "pads,backorder,1,1,4,negative_binomial,2,5\n")


def run(args, capsys):
    try:
        code = main(args)
    except SystemExit as e:  # argparse's own errors end this way
        code = e.code
    out = capsys.readouterr()
    return code, out.out, out.err.strip()


@pytest.mark.slow
def test_invented_data_fit_then_portfolio_with_robustness_report(tmp_path, capsys):
    fit = tmp_path / "items"
    code, _, err = run(["fit", str(DATA / "invented_bike_parts_sales.csv"), "--items",
                        str(DATA / "invented_bike_parts_items.csv"), "--out", str(fit), "--no-progress"], capsys)
    assert code == 0, err
    out = tmp_path / "run"
    code, stdout, err = run(["portfolio", str(fit), "--sales", str(DATA / "invented_bike_parts_sales.csv"),
                             "--out", str(out), "--policies", "base_stock,capped_base_stock", "--bootstrap", "1",
                             "--workers", "1", "--no-progress"], capsys)
    assert code == 0, err
    table = pd.read_csv(out / "portfolio.csv")
    assert len(table) == 30 and (table["status"] == "ok").all()
    assert set(table["policy"]) <= {"base_stock", "capped_base_stock"} and table["param_S"].notna().all()
    # the chosen policy is the cheaper of the two, and never below the certified optimum
    assert (table["gap"] > -1e-5).all()
    rb = pd.read_csv(out / "robustness.csv")
    assert set(rb["alternative"]) == {"wider", "other_family", "bootstrap", "random_lead_time"}
    ok = rb[rb["status"] == "ok"]
    assert len(ok) >= 110 and (ok["regret"] > -1e-5 * ok["optimum_b"]).all()
    # every item's chosen policy (base-stock family) supports a random lead time: all measured
    assert (ok["alternative"] == "random_lead_time").sum() == 30
    md = (out / "report.md").read_text()
    assert "## Robustness: what if the demand model is wrong?" in md and "random_lead_time" in md
    assert (out / "regret.png").stat().st_size > 0 and (out / "gap_histogram.png").stat().st_size > 0
    # a summary, not one line per cell (180+ cells here)
    assert len(stdout.splitlines()) < 45 and "robustness:" in stdout


def test_resume_skips_done_cells_and_recomputes_a_damaged_one(tmp_path, capsys):
    items = tmp_path / "items.csv"
    items.write_text(ITEMS)
    out = tmp_path / "run"
    args = ["portfolio", str(items), "--out", str(out), "--policies", "base_stock", "--workers", "1",
            "--no-progress", "--json", "--no-report"]
    code, stdout, err = run(args, capsys)
    assert code == 0, err
    first = json.loads(stdout)
    table = (out / "portfolio.csv").read_text()
    # robustness: per item two alternatives with no history given (wider, random_lead_time), each
    # its optimum and the chosen policy
    assert first["stages"]["choice"]["ran"] == 4 and first["stages"]["robustness"]["ran"] == 8
    cell = sorted((out / "choice" / "cells").glob("*.json"))[0]
    cell.write_text(cell.read_text().replace('"cost"', '"kost"'))  # edited by hand: its digest fails
    code, stdout, err = run(args, capsys)
    assert code == 0, err
    again = json.loads(stdout)
    assert again["stages"]["choice"]["ran"] == 1 and again["stages"]["choice"]["already_done"] == 3
    assert again["stages"]["robustness"]["ran"] == 0
    assert "damaged" in err and len(list((out / "choice" / "damaged").glob("*.json"))) == 1
    assert (out / "portfolio.csv").read_text() == table  # same results bit for bit


def _fake_result(n: int):
    class R:
        pass
    r = R()
    r.name, r.seconds, r.left_out, r.item_notes = "fake", 1.0, ["note"], {}
    r.stages = {"choice": {"cells": 6 * n, "ran": 6 * n, "already_done": 0, "failed": [], "seconds": 1.0}}
    r.choice = pd.DataFrame({"item": [f"i{k}" for k in range(n)], "status": "ok", "policy": "base_stock",
                             "params": '{"S": 3}', "cost": 1.0 + (pd.Series(range(n)) % 7) / 100, "optimum": 1.0})
    r.choice["gap"] = r.choice["cost"] - 1.0
    r.robustness = pd.DataFrame({"item": r.choice["item"], "alternative": "wider", "status": "ok",
                                 "regret": 0.1, "regret_rel": 0.1})
    return r


def test_console_summary_length_does_not_grow_with_the_items():
    assert len(summary_lines(_fake_result(20))) == len(summary_lines(_fake_result(5000)))


@pytest.mark.parametrize("extra, words", [
    (["--bootstrap", "-1"], ["--bootstrap", "[0, 100]"]),
    (["--variance-factor", "0.5"], ["--variance-factor", "(1, 100]"]),
    (["--max-states", "nan"], ["--max-states"]),
    (["--policies", "base_stock,magic"], ["--policies", "magic"]),
    (["--alternatives", "wider,lead_time_noise"], ["--alternatives", "lead_time_noise", "random_lead_time"]),
    (["--workers", "0"], ["--workers"]),
    (["--backend", "cloud"], ["--backend", "local, ray"]),
    (["--address", "1.2.3.4:1"], ["--address", "--backend ray"]),
    (["--agent", "nosuchagent"], ["nosuchagent"]),
])
def test_bad_option_is_one_line_exit_2(tmp_path, capsys, extra, words):
    items = tmp_path / "items.csv"
    items.write_text(ITEMS)
    code, stdout, err = run(["portfolio", str(items), "--out", str(tmp_path / "run"), *extra], capsys)
    assert code == 2 and len(err.splitlines()) == 1 and "Traceback" not in err, err
    for w in words:
        assert w in err
    assert not (tmp_path / "run").exists()  # nothing started


def test_bad_inputs_are_refused_before_any_work(tmp_path, capsys):
    items = tmp_path / "items.csv"
    items.write_text(ITEMS.replace("pads,backorder,1,", "pads,backorder,x,"))
    code, _, err = run(["portfolio", str(items), "--out", str(tmp_path / "run")], capsys)
    assert code == 2 and "column 'lead_time', line 3" in err and len(err.splitlines()) == 1
    items.write_text(ITEMS)
    blocker = tmp_path / "file"
    blocker.write_text("x")
    code, _, err = run(["portfolio", str(items), "--out", str(blocker)], capsys)
    assert code == 2 and "--out" in err and len(err.splitlines()) == 1
    sales = tmp_path / "sales.csv"
    sales.write_text("date,item,units,stockout\n2024-01-01,other,3,0\n")
    code, _, err = run(["portfolio", str(items), "--out", str(tmp_path / "run"), "--sales", str(sales)], capsys)
    assert code == 2 and "--sales" in err and "matched by name" in err
    assert not (tmp_path / "run").exists()
