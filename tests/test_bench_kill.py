"""A bench run killed with SIGKILL partway resumes to the table of an uninterrupted run."""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time

import pandas as pd
import pytest

from invbench.experiments.runner import run_bench
from invbench.experiments.store import TIMING_COLUMNS
from invbench.experiments.suite import load_suite
from tests.test_bench_helpers import REPO_ROOT, instance, sim_policy, subprocess_env, write_suite

#: Guard against a hung child only; the test's outcome never depends on it.
GIVE_UP_SECONDS = 120


def _bench_cmd(suite_path, out):
    return [sys.executable, "-m", "invbench", "bench", str(suite_path), "--out", str(out),
            "--workers", "2", "--no-report", "--no-progress"]


def _wait_for_cells(proc, cells_dir, n):
    t0 = time.monotonic()
    while time.monotonic() - t0 < GIVE_UP_SECONDS:
        if cells_dir.is_dir() and len(list(cells_dir.glob("*.json"))) >= n:
            return
        if proc.poll() is not None:
            break
        time.sleep(0.05)
    raise AssertionError(f"run ended or hung before {n} cells landed (exit {proc.poll()})")


@pytest.mark.slow
def test_sigkill_then_rerun_equals_uninterrupted_run(tmp_path):
    insts = [instance("a", "backorder", L=1), instance("b", "lost_sales", L=2), instance("c", "backorder", L=0)]
    pols = [sim_policy(f"S{S}", S, pause=0.15) for S in (4, 6, 8, 10, 12)]
    path = write_suite(tmp_path / "kill.toml", insts, pols, [0, 1], name="kill")
    total = len(insts) * len(pols) * 2
    out = tmp_path / "killed"
    env = subprocess_env()
    proc = subprocess.Popen(_bench_cmd(path, out), cwd=REPO_ROOT, env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.STDOUT, start_new_session=True)
    try:
        _wait_for_cells(proc, out / "cells", 4)
        assert proc.poll() is None, "the run finished before it could be killed"
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=30)
    finally:
        try:  # the pool workers are orphans now: end them (this test's own process group)
            os.killpg(proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
    assert proc.returncode == -signal.SIGKILL
    landed = {p.name: p.read_bytes() for p in (out / "cells").glob("*.json")}
    assert 4 <= len(landed) < total
    assert not (out / "results.csv").exists()  # killed before the table was written

    rerun = subprocess.run(_bench_cmd(path, out), cwd=REPO_ROOT, env=env, capture_output=True, text=True,
                           timeout=GIVE_UP_SECONDS)
    assert rerun.returncode == 0, rerun.stderr
    assert f"{len(landed)} already done, {total - len(landed)} to run" in rerun.stdout
    for name, blob in landed.items():  # cells that had landed were kept, not recomputed
        assert (out / "cells" / name).read_bytes() == blob

    fresh = run_bench(load_suite(path), tmp_path / "fresh", workers=1, progress=False)
    killed = pd.read_csv(out / "results.csv")
    ref = pd.read_csv(tmp_path / "fresh" / "results.csv")
    assert len(killed) == total and killed["cell_id"].is_unique
    assert fresh.ran == total
    pd.testing.assert_frame_equal(killed.drop(columns=TIMING_COLUMNS), ref.drop(columns=TIMING_COLUMNS))


@pytest.mark.slow
def test_ctrl_c_stops_workers_and_keeps_finished_cells(tmp_path):
    pols = [sim_policy(f"S{S}", S, pause=0.3) for S in (4, 6, 8, 10, 12, 14)]
    path = write_suite(tmp_path / "int.toml", [instance("a"), instance("b")], pols, [0, 1], name="int")
    out = tmp_path / "run"
    proc = subprocess.Popen(_bench_cmd(path, out), cwd=REPO_ROOT, env=subprocess_env(), stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, start_new_session=True)
    try:
        _wait_for_cells(proc, out / "cells", 2)
        os.killpg(proc.pid, signal.SIGINT)  # what a terminal's Ctrl-C sends: the whole group
        _, err = proc.communicate(timeout=60)
    finally:
        try:
            os.killpg(proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
    assert proc.returncode == 130, err
    assert "interrupted" in err and "Traceback" not in err
    landed = len(list((out / "cells").glob("*.json")))
    table = pd.read_csv(out / "results.csv")  # written on the way out, with what had landed
    assert 2 <= len(table) == landed < 24
