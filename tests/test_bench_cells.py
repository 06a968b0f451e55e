"""Damaged results: every cell file checks itself (sha256 digest inside); a file that is not
UTF-8, not complete or edited is moved aside with one warning line and its cell is run again;
`report` lists what it could not read; results.csv and results.parquet always agree."""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from invbench.experiments.cellfile import DamagedCell, decode_cell, digest, encode_cell
from invbench.experiments.report import write_report
from invbench.experiments.runner import run_bench
from invbench.experiments.store import TIMING_COLUMNS, ResultStore
from invbench.experiments.suite import load_suite
from tests.test_bench_helpers import instance, sim_policy, write_suite


@pytest.fixture()
def done(tmp_path):
    """A finished run: optimum (exact) and two simulated policies on two instances."""
    path = write_suite(tmp_path / "d.toml", [instance("a"), instance("b", "lost_sales", L=2)],
                       [{"name": "optimum"}, sim_policy("S8", 8), sim_policy("S10", 10)], [0], name="d")
    suite = load_suite(path)
    res = run_bench(suite, tmp_path / "run", workers=1, progress=False)
    assert not res.failed
    return suite, tmp_path / "run", res.table


def _cell(out, table, instance_name, kind):
    cid = table[(table["instance"] == instance_name) & (table["kind"] == kind)]["cell_id"].iloc[0]
    return out / "cells" / f"{cid}.json"


def _forge(path, **changes):
    """Rewrite a cell with a *valid* digest over changed content (a careful forger, or a bug)."""
    rec = json.loads(path.read_text())
    rec.pop("digest")
    rec.update(changes)
    rec = {k: v for k, v in rec.items() if v is not ...}
    path.write_text(json.dumps({**rec, "digest": digest(rec)}))


def _strip(df):
    return df.drop(columns=TIMING_COLUMNS).reset_index(drop=True)


@pytest.mark.parametrize("damage, reason", [
    (lambda p: p.write_bytes(p.read_bytes().replace(b'"cost"', b'"c\xffst"')), "not UTF-8"),
    (lambda p: p.write_text('{"cell_id": "%s"}' % p.stem), "no digest"),
    (lambda p: p.write_text("[1, 2]"), "not a JSON object"),
    (lambda p: p.write_text(p.read_text()[:40]), "not valid JSON"),
    (lambda p: _forge(p, cost=...), "key 'cost' missing"),
    (lambda p: _forge(p, seed="zero"), "key 'seed' must be an integer"),
    (lambda p: _forge(p, cell_id="0123"), "key 'cell_id' must be the file's name"),
])
def test_damaged_cell_is_moved_aside_and_rerun(done, capsys, damage, reason):
    suite, out, table = done
    path = _cell(out, table, "b", "custom")
    damage(path)
    capsys.readouterr()
    res = run_bench(suite, out, workers=1, progress=False)
    err = [ln for ln in capsys.readouterr().err.splitlines() if ln.startswith("invbench: warning")]
    assert len(err) == 1 and f"cells/{path.name} is damaged ({reason}" in err[0], err
    assert res.ran == 1 and res.already_done == len(table) - 1
    moved = list((out / "damaged").glob("cells-*.json"))
    assert len(moved) == 1 and path.stem in moved[0].name
    decode_cell(path)  # the rerun wrote a sound file
    pd.testing.assert_frame_equal(_strip(res.table), _strip(table))


def test_edited_cost_is_caught_not_believed(done, capsys):
    # The case: an optimum cell's cost edited upward makes every policy look better than
    # optimal (a negative gap). The digest catches the edit; the rerun restores the certified value.
    suite, out, table = done
    path = _cell(out, table, "a", "optimum")
    text = path.read_text()
    rec = json.loads(text)
    edited = text.replace(json.dumps(rec["cost"]), json.dumps(rec["cost"] * 1.6))
    assert edited != text
    path.write_text(edited)
    res = run_bench(suite, out, workers=1, progress=False)
    assert "digest mismatch" in capsys.readouterr().err
    assert res.ran == 1
    assert (res.table.loc[res.table["kind"] != "optimum", "gap"] >= -1e-6).all()
    assert np.isclose(res.table.loc[res.table["kind"] == "optimum", "cost"], table.loc[table["kind"] == "optimum", "cost"]).all()


def test_report_lists_cells_it_could_not_read(done, capsys):
    from invbench.cli import main

    suite, out, table = done
    path = _cell(out, table, "a", "custom")
    path.write_bytes(b"\x00\x01garbage")
    capsys.readouterr()
    assert main(["report", str(out)]) == 0
    err = capsys.readouterr().err.splitlines()
    assert any("is damaged" in ln for ln in err)
    assert any(ln.startswith("invbench: warning: could not read cells/" + path.name) for ln in err), err
    md = (out / "report.md").read_text()
    assert "Cell files that could not be read" in md and f"cells/{path.name}" in md
    assert f"{len(table) - 1} of the suite's {len(table)} cells" in md
    rep = write_report(out)  # a second report still lists it until the cell is rerun
    assert [u[0] for u in rep.unread] == [f"cells/{path.name}"]
    run_bench(suite, out, workers=1, progress=False)
    assert write_report(out).unread == []


def test_damaged_failed_record_and_run_json_do_not_stop_a_rerun(done, capsys):
    suite, out, table = done
    (out / "failed" / "0000000000000000.json").write_text("{not json")
    (out / "run.json").write_bytes(b"\xff\xfe")
    res = run_bench(suite, out, workers=1, progress=False)
    assert res.ran == 0
    err = capsys.readouterr().err
    assert "failed/0000000000000000.json is damaged" in err and "run.json is damaged" in err
    meta = json.loads((out / "run.json").read_text())
    assert len(meta["invocations"]) == 1


def test_a_record_without_a_finite_cost_is_stored_as_a_failure(tmp_path):
    store = ResultStore(tmp_path)
    store.cells_dir.mkdir(parents=True)
    store.failed_dir.mkdir(parents=True)
    rec = {"cell_id": "abc", "suite": "s", "instance": "i", "policy": "p", "kind": "custom", "seed": 0,
           "status": "ok", "cost": float("nan"), "method": "simulated", "params": {}}
    store.save(rec)
    assert not (tmp_path / "cells" / "abc.json").exists()
    back = decode_cell(tmp_path / "failed" / "abc.json")
    assert back["status"] == "failed" and "cost" in back["error"]
    with pytest.raises(DamagedCell):
        encode_cell({**rec, "seed": -1})


def test_csv_and_parquet_hold_the_same_table(done):
    pytest.importorskip("pyarrow")
    suite, out, table = done
    csv = pd.read_csv(out / "results.csv")
    pq = pd.read_parquet(out / "results.parquet")
    assert list(csv.columns) == list(pq.columns) and len(csv) == len(pq) == len(table)
    for col in csv.columns:
        a, b = csv[col], pq[col]
        if pd.api.types.is_numeric_dtype(a) and pd.api.types.is_numeric_dtype(b):
            np.testing.assert_allclose(a.astype(float), b.astype(float), rtol=0, atol=0, err_msg=col)
        else:  # text columns: empty in the CSV is missing in Parquet
            def text(s):
                return s.astype(object).where(s.notna(), "").astype(str).tolist()
            assert text(a) == text(b), col
