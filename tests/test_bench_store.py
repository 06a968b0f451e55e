"""Result store and runner: atomic cells, resume without duplicates, failures kept apart,
the same table from every local backend, and run metadata."""
from __future__ import annotations

import json

import pandas as pd
import pytest

from invbench.envs.errors import SpecError
from invbench.experiments.runner import run_bench
from invbench.experiments.store import TIMING_COLUMNS, ResultStore, atomic_write
from invbench.experiments.suite import load_suite
from tests.test_bench_helpers import instance, sim_policy, write_suite


def _suite(tmp_path, name="t", policies=None, seeds=(0, 1)):
    insts = [instance("a", "backorder", L=1, mean=3.0), instance("b", "lost_sales", L=2, mean=3.0)]
    pols = policies or [sim_policy("S8", 8), sim_policy("S10", 10)]
    return load_suite(write_suite(tmp_path / f"{name}.toml", insts, pols, list(seeds), name=name))


def _strip(df: pd.DataFrame) -> pd.DataFrame:
    return df.drop(columns=TIMING_COLUMNS).reset_index(drop=True)


def test_atomic_write_leaves_no_temp_file(tmp_path):
    target = tmp_path / "x" / "a.json"
    atomic_write(target, "{}")
    atomic_write(target, '{"b": 1}')
    assert json.loads(target.read_text()) == {"b": 1}
    assert [p.name for p in target.parent.iterdir()] == ["a.json"]


def test_rerun_resumes_and_never_duplicates(tmp_path):
    suite = _suite(tmp_path)
    out = tmp_path / "run"
    first = run_bench(suite, out, workers=1, progress=False, command=["test"])
    assert (first.cells, first.ran, first.already_done) == (8, 8, 0)
    stamps = {p.name: p.read_bytes() for p in (out / "cells").iterdir()}
    second = run_bench(suite, out, workers=1, progress=False, command=["test"])
    assert (second.ran, second.already_done) == (0, 8)
    # untouched files: nothing was recomputed (the timing fields would differ)
    assert {p.name: p.read_bytes() for p in (out / "cells").iterdir()} == stamps
    df = pd.read_csv(out / "results.csv")
    assert len(df) == 8 and df["cell_id"].is_unique
    assert set(df["seed"]) == {0, 1} and set(df["policy"]) == {"S8", "S10"}
    meta = json.loads((out / "run.json").read_text())
    assert len(meta["invocations"]) == 2 and meta["invocations"][1]["already_done"] == 8
    assert "numpy" in meta["versions"] and meta["machine"]["cpu_count"] >= 1
    assert meta["invocations"][0]["command"] == ["test"]


def test_partial_folder_is_completed_to_the_same_table(tmp_path):
    suite = _suite(tmp_path)
    full = run_bench(suite, tmp_path / "full", workers=1, progress=False).table
    part = tmp_path / "part"
    run_bench(suite, part, workers=1, progress=False)
    cells = sorted((part / "cells").iterdir())
    for p in cells[::2]:  # as if the run had died before these cells landed
        p.unlink()
    (part / "cells" / ".abc.json.tmp").write_text('{"cell_id": "trunc')  # a write cut off by a kill
    (part / "cells" / cells[1].name).write_text('{"cell_id": ')  # unreadable: must be redone
    res = run_bench(suite, part, workers=1, progress=False)
    assert res.ran == len(cells[::2]) + 1
    assert not list((part / "cells").glob(".*.tmp"))
    pd.testing.assert_frame_equal(_strip(res.table), _strip(full))


def test_process_pool_gives_the_inline_table(tmp_path):
    # a short pause per cell so that both workers are up before the queue runs dry
    suite = _suite(tmp_path, policies=[sim_policy("S8", 8, pause=0.3), sim_policy("S10", 10, pause=0.3)])
    inline = run_bench(suite, tmp_path / "inline", workers=1, progress=False).table
    pool = run_bench(suite, tmp_path / "pool", workers=2, progress=False).table
    pd.testing.assert_frame_equal(_strip(pool), _strip(inline))
    assert pool["worker"].nunique() == 2  # really ran in two worker processes


def test_failing_cells_are_recorded_and_retried(tmp_path):
    pols = [sim_policy("good", 8),
            {"function": "tests.test_bench_helpers:no_such_function", "label": "missing"},
            {"function": "tests.test_bench_helpers:broken_cell", "label": "broken"}]
    suite = _suite(tmp_path, policies=pols, seeds=(0,))
    out = tmp_path / "run"
    res = run_bench(suite, out, workers=1, progress=False)
    assert res.ran == 6 and len(res.failed) == 4
    df = res.table
    assert (df.loc[df["policy"] == "good", "status"] == "ok").all()
    errs = df.loc[df["policy"] == "missing", "error"].tolist()
    assert all("no_such_function" in e for e in errs)
    broken_errs = df.loc[df["policy"] == "broken", "error"].tolist()
    assert all("broken_cell' raised RuntimeError: measurement broke on" in e for e in broken_errs), broken_errs
    again = run_bench(suite, out, workers=1, progress=False)
    assert again.ran == 4 and again.already_done == 2  # failures are run again, successes kept
    assert len(again.table) == 6


def test_folder_of_another_suite_is_refused(tmp_path):
    run_bench(_suite(tmp_path, name="one", seeds=(0,)), tmp_path / "run", workers=1, progress=False)
    with pytest.raises(SpecError, match="--out"):
        run_bench(_suite(tmp_path, name="two", seeds=(0,)), tmp_path / "run", workers=1, progress=False)


def test_edited_suite_does_not_reuse_changed_cells(tmp_path):
    out = tmp_path / "run"
    run_bench(_suite(tmp_path, seeds=(0,)), out, workers=1, progress=False)
    edited = _suite(tmp_path, policies=[sim_policy("S8", 8), sim_policy("S10", 11)], seeds=(0,))
    res = run_bench(edited, out, workers=1, progress=False)
    assert res.ran == 2 and res.already_done == 2  # only the changed entry's cells run again
    df = ResultStore(out).table(edited)
    assert len(df) == 4 and sorted(json.loads(p)["S"] for p in df["params"]) == [8, 8, 11, 11]


def test_cli_bench_writes_table_report_and_exit_codes(tmp_path, capsys):
    from invbench.cli import main

    path = write_suite(tmp_path / "s.toml", [instance("a")], [sim_policy("S8", 8)], [0])
    out = tmp_path / "run"
    assert main(["bench", str(path), "--out", str(out), "--workers", "1", "--no-progress"]) == 0
    text = capsys.readouterr().out
    assert "[1/1] a | S8 seed 0 | cost" in text and "report:" in text
    assert (out / "results.csv").is_file() and (out / "report.html").is_file()
    assert main(["bench", str(path), "--out", str(out), "--workers", "0"]) == 2
    assert main(["bench", str(path), "--out", str(out), "--backend", "slurm"]) == 2
    err = capsys.readouterr().err
    assert "--workers: must be an integer in [1, 1024], got 0" in err and "--backend: must be one of local, ray" in err
    assert "Traceback" not in err
