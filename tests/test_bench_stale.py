"""Finished agent cells trained under other settings than today's defaults (experiments/stale.py).

A cell id hashes the suite entry, not the code's defaults, so a changed default must be caught
by comparing the settings each cell recorded in agents/ID/train.json with today's.
"""
from __future__ import annotations

import json

import pytest

from invbench.agents import settings as agent_settings
from invbench.experiments.runner import run_bench
from invbench.experiments.stale import (ABSENT, find_stale, settings_changes, today_settings,
                                        warning_lines)
from invbench.experiments.suite import load_suite
from tests.test_bench_helpers import instance, write_suite


def _suite(tmp_path, pols):
    insts = [instance("ls-L1", "lost_sales", L=1, mean=2.0, p=4.0)]
    return load_suite(write_suite(tmp_path / "s.toml", insts, pols, [0], name="stale"))


def _fake_done(tmp_path, cell, settings):
    """A finished cell as the bench leaves it: its record, and train.json with the settings used."""
    d = tmp_path / "agents" / cell.cell_id
    d.mkdir(parents=True)
    (d / "train.json").write_text(json.dumps({"settings": settings}))
    return {cell.cell_id: {"kind": "agent", "status": "ok"}}


def test_settings_changes_names_each_difference():
    rec = {"a": 1, "hidden": [64, 64], "progress": True}
    now = {"a": 2, "hidden": [64, 64], "progress": False, "new": "x"}
    assert settings_changes(rec, now) == {"a": (1, 2), "new": (ABSENT, "x")}  # progress: display only
    assert settings_changes(rec, now, ignore=("new",)) == {"a": (1, 2)}
    assert settings_changes(now, now) == {}


def test_cell_with_todays_settings_is_not_stale(tmp_path):
    suite = _suite(tmp_path, [{"agent": "ppo", "steps": 100}])
    cell = suite.cells()[0]
    today, _ = today_settings(cell.policy.to_dict())
    assert find_stale([cell], _fake_done(tmp_path, cell, today), tmp_path) == []


def test_changed_default_is_found_and_named(tmp_path):
    suite = _suite(tmp_path, [{"agent": "ppo", "steps": 100, "settings": {"n_envs": 8}}])
    cell = suite.cells()[0]
    today, _ = today_settings(cell.policy.to_dict())
    assert today["n_envs"] == 8 and today["threads"] == 1  # the suite's value, the bench's thread
    old = {**today, "gae_lambda": 0.5}
    del old["obs_clip"]  # a setting added since the cell ran
    stale = find_stale([cell], _fake_done(tmp_path, cell, old), tmp_path)
    assert [s.changes for s in stale] == [{"gae_lambda": (0.5, today["gae_lambda"]),
                                           "obs_clip": (ABSENT, today["obs_clip"])}]
    (line,) = warning_lines(stale)
    assert "1 finished 'ppo' cell was trained" in line and f"gae_lambda: 0.5 -> {today['gae_lambda']}" in line
    assert f"obs_clip: (absent) -> {today['obs_clip']}" in line and "--rerun-stale" in line


def test_other_agents_settings_and_unjudgeable_cells_are_left_alone(tmp_path):
    suite = _suite(tmp_path, [{"agent": "ppo", "steps": 100}])
    cell = suite.cells()[0]
    today, unused = today_settings(cell.policy.to_dict())
    assert "td_loss" in unused  # a DQN-only setting: PPO cells do not depend on it
    old = {k: v for k, v in today.items() if k != "td_loss"}
    assert find_stale([cell], _fake_done(tmp_path, cell, old), tmp_path) == []
    # no train.json (or an unreadable one): cannot be judged, so not flagged
    (tmp_path / "agents" / cell.cell_id / "train.json").write_text("{not json")
    assert find_stale([cell], {cell.cell_id: {}}, tmp_path) == []


def test_a_new_floor_setting_makes_cells_stale_only_where_a_floor_applies(tmp_path):
    """DQN's position floor acts only through the floor it resolves to: none under lost sales
    (agents/scaling.position_floor_for), so cells trained before the setting existed stay done
    there, while a backorder cell, which would now train with a floor, is stale."""
    from invbench.agents.scaling import position_floor_for
    insts = [instance("ls-L1", "lost_sales", L=1, mean=2.0, p=4.0), instance("bo-L1", "backorder", L=1)]
    suite = load_suite(write_suite(tmp_path / "s.toml", insts, [{"agent": "dqn", "steps": 100}], [0], name="stale"))
    cells = {c.instance_name: c for c in suite.cells()}
    today, _ = today_settings(cells["ls-L1"].policy.to_dict())
    assert today["position_floor"] is True
    old = {k: v for k, v in today.items() if k != "position_floor"}
    done = {}
    for c in cells.values():  # recorded as before the floor: no setting, no floor in the scaling
        d = tmp_path / "agents" / c.cell_id
        d.mkdir(parents=True)
        (d / "train.json").write_text(json.dumps({"settings": old, "scaling": {"position_cap": 30}}))
        done[c.cell_id] = {"kind": "agent", "status": "ok"}
    stale = find_stale(list(cells.values()), done, tmp_path)
    assert position_floor_for(cells["bo-L1"].instance) is not None
    assert [(s.label, s.changes) for s in stale] == [("dqn", {"position_floor": (ABSENT, True)})]
    assert stale[0].cell_id == cells["bo-L1"].cell_id


@pytest.mark.slow
def test_bench_warns_keeps_and_reruns_on_request(tmp_path, monkeypatch, capsys):
    suite = _suite(tmp_path, [{"agent": "ppo", "steps": 256,
                               "settings": {"eval_every": 128, "n_envs": 4, "n_steps": 32, "batch_size": 128,
                                            "eval_replications": 2, "eval_periods": 50}}])
    out = tmp_path / "out"
    first = run_bench(suite, out, workers=1, progress=False)
    assert first.ran == 1 and not first.failed, first.failed
    cid = suite.cells()[0].cell_id
    old_record = (out / "cells" / f"{cid}.json").read_bytes()
    capsys.readouterr()

    # today's code has another default: the cell is named, kept and not rerun
    was = agent_settings.AGENT_DEFAULTS["ppo"]["gae_lambda"]
    monkeypatch.setitem(agent_settings.AGENT_DEFAULTS, "ppo",
                        {**agent_settings.AGENT_DEFAULTS["ppo"], "gae_lambda": was / 2})
    kept = run_bench(suite, out, workers=1, progress=False)
    err = capsys.readouterr().err
    assert kept.ran == 0 and f"gae_lambda: {was} -> {was / 2}" in err
    assert (out / "cells" / f"{cid}.json").read_bytes() == old_record

    # --rerun-stale: the old result and policy move to stale/ (logged), the cell trains again
    again = run_bench(suite, out, workers=1, progress=False, rerun_stale=True)
    assert again.ran == 1 and not again.failed
    moved = list((out / "stale").glob(f"{cid}-*.json"))
    assert len(moved) == 1 and moved[0].read_bytes() == old_record
    assert len(list((out / "stale" / "agents").glob(f"{cid}-*/train.json"))) == 1
    assert cid in (out / "stale" / "log.txt").read_text()
    new = json.loads((out / "agents" / cid / "train.json").read_text())
    assert new["settings"]["gae_lambda"] == was / 2
    capsys.readouterr()

    # now up to date: nothing to warn about, nothing to run
    last = run_bench(suite, out, workers=1, progress=False)
    assert last.ran == 0 and "trained under other settings" not in capsys.readouterr().err
