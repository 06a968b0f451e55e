"""The ray backend on a real Ray head started on 127.0.0.1 by the test: same table as local."""
from __future__ import annotations

import json
import os
import secrets
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pandas as pd
import pytest

from invbench.experiments.runner import run_bench
from invbench.experiments.store import TIMING_COLUMNS
from invbench.experiments.suite import load_suite
from tests.test_bench_helpers import REPO_ROOT, instance, sim_policy, subprocess_env, write_suite

GIVE_UP_SECONDS = 90  # guard against a hung head or driver; not part of what is tested


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _wait_port(port: int, proc: subprocess.Popen) -> None:
    t0 = time.monotonic()
    while time.monotonic() - t0 < GIVE_UP_SECONDS:
        if proc.poll() is not None:
            raise AssertionError(f"ray head exited early: {proc.stdout.read()}")
        with socket.socket() as s:
            if s.connect_ex(("127.0.0.1", port)) == 0:
                return
        time.sleep(0.2)
    raise AssertionError("ray head did not open its port")


@pytest.mark.slow
def test_ray_backend_matches_local(tmp_path):
    ray_bin = Path(sys.executable).with_name("ray")
    assert ray_bin.exists(), "ray is not installed in this environment (pip install 'invbench[cluster]')"
    insts = [instance("a", "backorder", L=1), instance("b", "lost_sales", L=2)]
    path = write_suite(tmp_path / "r.toml", insts, [sim_policy("S6", 6), sim_policy("S9", 9)], [0, 1], name="r")
    port = _free_port()
    # A short private temp dir: Ray's socket paths must stay under the Unix limit.
    ray_tmp = tempfile.mkdtemp(prefix="rt", dir="/tmp")
    env = subprocess_env()
    env["RAY_USAGE_STATS_ENABLED"] = "0"
    # Token auth with a token of this test's own: the head accepts only our driver, and no
    # token file left in ~/.ray by an earlier Ray run can change what this test does.
    env["RAY_AUTH_MODE"] = "token"
    env["RAY_AUTH_TOKEN"] = secrets.token_hex(32)
    head = subprocess.Popen(
        [str(ray_bin), "start", "--head", "--block", "--node-ip-address=127.0.0.1", f"--port={port}",
         "--num-cpus=2", "--include-dashboard=false", "--disable-usage-stats", f"--temp-dir={ray_tmp}"],
        cwd=REPO_ROOT, env=env, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
        start_new_session=True)
    try:
        _wait_port(port, head)
        out = tmp_path / "ray"
        run = subprocess.run(
            [sys.executable, "-m", "invbench", "bench", str(path), "--out", str(out), "--backend", "ray",
             "--address", f"127.0.0.1:{port}", "--no-report", "--no-progress"],
            cwd=REPO_ROOT, env=env, capture_output=True, text=True, timeout=GIVE_UP_SECONDS)
        assert run.returncode == 0, run.stdout + run.stderr
        assert "(ray)" in run.stdout
    finally:
        try:  # the head and everything it started share the new session's process group
            os.killpg(head.pid, signal.SIGTERM)
            head.wait(timeout=20)
        except (ProcessLookupError, subprocess.TimeoutExpired):
            pass
        try:
            os.killpg(head.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
        shutil.rmtree(ray_tmp, ignore_errors=True)
    ray_df = pd.read_csv(out / "results.csv")
    local = run_bench(load_suite(path), tmp_path / "local", workers=1, progress=False)
    local_df = pd.read_csv(tmp_path / "local" / "results.csv")
    assert local.ran == 8 and len(ray_df) == 8 and (ray_df["status"] == "ok").all()
    meta = json.loads((out / "run.json").read_text())
    assert meta["invocations"][-1]["backend"] == "ray"
    assert meta["invocations"][-1]["address"] == f"127.0.0.1:{port}"
    pd.testing.assert_frame_equal(ray_df.drop(columns=TIMING_COLUMNS), local_df.drop(columns=TIMING_COLUMNS))
