"""A bench run killed with SIGKILL partway resumes to the table of an uninterrupted run and
leaves no process behind; SIGTERM stops it like Ctrl-C, with the results written."""
from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time

import pandas as pd
import pytest

from invbench.experiments.runner import run_bench
from invbench.experiments.store import TIMING_COLUMNS, ResultStore
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
    # SIGINT back to its default in the child: a shell ignores it in background jobs, and Python
    # keeps an inherited "ignore" (so would the run), which is not what a terminal's Ctrl-C meets
    proc = subprocess.Popen(_bench_cmd(path, out), cwd=REPO_ROOT, env=subprocess_env(), stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, start_new_session=True,
                            preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
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


# ---------------------------------------------------------------------------- no orphans
def _proc_table() -> dict[int, tuple[int, str, str]]:
    """pid -> (parent pid, state letter, start time) of every process, from /proc (Linux)."""
    out = {}
    for d in os.listdir("/proc"):
        if not d.isdigit():
            continue
        try:
            with open(f"/proc/{d}/stat") as f:
                stat = f.read()
        except OSError:
            continue
        rest = stat[stat.rindex(")") + 2:].split()  # fields after "pid (comm)"
        out[int(d)] = (int(rest[1]), rest[0], rest[19])
    return out


def _descendants(pid: int) -> dict[int, str]:
    """pid -> start time of every live descendant of `pid`."""
    table = _proc_table()
    found, todo = {}, [pid]
    while todo:
        parent = todo.pop()
        for child, (ppid, state, start) in table.items():
            if ppid == parent and child not in found and state != "Z":
                found[child] = start
                todo.append(child)
    return found


def _alive(procs: dict[int, str]) -> list[int]:
    table = _proc_table()
    return [p for p, start in procs.items() if p in table and table[p][2] == start and table[p][1] != "Z"]


@pytest.mark.slow
@pytest.mark.skipif(not os.path.isdir("/proc/self"), reason="reads the process table from /proc (Linux)")
def test_sigkill_leaves_no_worker_or_resource_tracker_behind(tmp_path):
    pols = [sim_policy(f"S{S}", S, pause=0.5) for S in (4, 6, 8, 10, 12, 14)]
    path = write_suite(tmp_path / "orph.toml", [instance("a"), instance("b")], pols, [0, 1], name="orph")
    out = tmp_path / "run"
    proc = subprocess.Popen(_bench_cmd(path, out), cwd=REPO_ROOT, env=subprocess_env(), stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL, start_new_session=True)
    children: dict[int, str] = {}
    try:
        _wait_for_cells(proc, out / "cells", 1)
        children = _descendants(proc.pid)
        # two pool workers and the multiprocessing resource tracker
        assert len(children) >= 3, children
        os.kill(proc.pid, signal.SIGKILL)  # the driver only: its children must notice by themselves
        proc.wait(timeout=30)
        deadline = time.monotonic() + 10.0  # the bound: gone within 10 s
        while _alive(children) and time.monotonic() < deadline:
            time.sleep(0.2)
        left = _alive(children)
    finally:
        for pid in _alive(children):  # never leave them running, whatever the outcome
            os.kill(pid, signal.SIGKILL)
    assert not left, f"still running 10 s after the driver was killed: {left}"


@pytest.mark.slow
def test_sigterm_writes_results_with_one_line_and_the_rerun_resumes(tmp_path):
    pols = [sim_policy(f"S{S}", S, pause=0.3) for S in (4, 6, 8, 10, 12, 14)]
    path = write_suite(tmp_path / "term.toml", [instance("a"), instance("b")], pols, [0, 1], name="term")
    out = tmp_path / "run"
    env = subprocess_env()
    proc = subprocess.Popen(_bench_cmd(path, out), cwd=REPO_ROOT, env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, start_new_session=True)
    try:
        _wait_for_cells(proc, out / "cells", 2)
        os.kill(proc.pid, signal.SIGTERM)
        _, err = proc.communicate(timeout=60)
    finally:
        try:
            os.killpg(proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
    assert proc.returncode == 143, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("invbench: terminated (SIGTERM)"), err
    assert "rerun the same command to resume" in lines[0]
    landed = {p.name: p.read_bytes() for p in (out / "cells").glob("*.json")}
    table = pd.read_csv(out / "results.csv")  # brought up to date on the way out
    assert 2 <= len(table) == len(landed) < 24
    assert set(table["cell_id"] + ".json") == set(landed)
    meta = json.loads((out / "run.json").read_text())
    assert meta["invocations"][-1]["completed"] is False
    assert meta["invocations"][-1]["ran"] == len(landed)

    rerun = subprocess.run(_bench_cmd(path, out), cwd=REPO_ROOT, env=env, capture_output=True, text=True,
                           timeout=GIVE_UP_SECONDS)
    assert rerun.returncode == 0, rerun.stderr
    assert f"{len(landed)} already done, {24 - len(landed)} to run" in rerun.stdout
    for name, blob in landed.items():
        assert (out / "cells" / name).read_bytes() == blob
    assert len(ResultStore(out).finished()) == 24
    assert len(pd.read_csv(out / "results.csv")) == 24


@pytest.mark.slow
@pytest.mark.skipif(not os.path.isdir("/proc/self"), reason="reads the process table from /proc (Linux)")
def test_sigkill_of_a_ray_driver_leaves_no_ray_process_behind(tmp_path):
    # A private Ray instance (no --address): after SIGKILL of the driver, Ray's re-parented node
    # agents used to keep running (seen here with the dashboard and runtime-env agents).
    pols = [sim_policy(f"S{S}", S, pause=1.0) for S in (4, 6, 8, 10, 12, 14)]
    path = write_suite(tmp_path / "orph.toml", [instance("a"), instance("b")], pols, [0, 1], name="orph")
    out = tmp_path / "run"
    env = subprocess_env()
    env["RAY_USAGE_STATS_ENABLED"] = "0"
    cmd = _bench_cmd(path, out) + ["--backend", "ray"]
    proc = subprocess.Popen(cmd, cwd=REPO_ROOT, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True)
    children: dict[int, str] = {}
    try:
        _wait_for_cells(proc, out / "cells", 1)
        children = _descendants(proc.pid)
        assert len(children) >= 4, children  # the watcher, Ray's head processes and workers
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=30)
        deadline = time.monotonic() + 10.0
        while _alive(children) and time.monotonic() < deadline:
            time.sleep(0.2)
        left = _alive(children)
    finally:
        for pid in _alive(children):
            os.kill(pid, signal.SIGKILL)
    assert not left, f"still running 10 s after the ray driver was killed: {left}"
