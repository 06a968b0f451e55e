"""`invbench serve`: a real uvicorn process on 127.0.0.1 and a free port, spoken to with httpx.

Orders must equal `policy.act` of the same saved policy loaded in Python, for many states, one
request at a time and in batches; bad states get 422 naming the field; a tampered policy stops
the server at start with one line and exit code 2. The server is stopped by the fixture (and
dies with this process, PR_SET_PDEATHSIG), so it never outlives the test.
"""
from __future__ import annotations

import ctypes
import json
import signal
import socket
import subprocess
import sys
import time

import httpx
import numpy as np
import pytest

import invbench
from invbench.envs.spec import spec_from_dict

SPEC = {"name": "bike-chain-L2", "model": "lost_sales", "lead_time": 2, "shortage_cost": 9.0,
        "demand": {"distribution": "poisson", "mean": 3}}  # invented instance
BACKORDER = {"name": "bike-bells", "model": "backorder", "lead_time": 1, "shortage_cost": 4.0,
             "demand": {"distribution": "poisson", "mean": 2}}


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _die_with_parent() -> None:
    ctypes.CDLL("libc.so.6", use_errno=True).prctl(1, signal.SIGTERM)  # PR_SET_PDEATHSIG


def _start(args: list[str]) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "invbench", "serve", *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, preexec_fn=_die_with_parent)


def wait_until_healthy(proc: subprocess.Popen, port: int, seconds: float = 90) -> str:
    """The server's URL once /health answers; fails the test if it exits or takes too long."""
    url = f"http://127.0.0.1:{port}"
    deadline = time.time() + seconds
    while True:
        try:
            if httpx.get(f"{url}/health", timeout=1).status_code == 200:
                return url
        except httpx.TransportError:
            pass
        if proc.poll() is not None:
            pytest.fail(f"server exited: {proc.stderr.read()}")
        if time.time() > deadline:
            pytest.fail(f"server did not answer /health within {seconds:g} s")
        time.sleep(0.2)


def _stop(proc: subprocess.Popen) -> None:
    if proc.poll() is None:
        proc.terminate()
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    d = tmp_path_factory.mktemp("serve")
    spec = spec_from_dict(SPEC)
    invbench.save_policy(invbench.solve(spec), d / "optimal")
    invbench.save_policy(invbench.make_policy("base_stock", spec), d / "bs")
    bo = spec_from_dict(BACKORDER)
    invbench.save_policy(invbench.solve(bo), d / "bells", states="reachable")
    _save_learned(spec, d / "net")
    port = _free_port()
    proc = _start([str(d / "optimal"), f"base={d / 'bs'}", str(d / "bells"), str(d / "net"), "--port", str(port)])
    try:
        url = wait_until_healthy(proc, port)
        with httpx.Client(base_url=url, timeout=10) as client:
            yield client, d
    finally:
        _stop(proc)
    assert proc.poll() is not None


def _save_learned(spec, path) -> None:
    """An untrained network (seeded): what it orders does not matter, only that it is served exactly."""
    import torch

    from invbench.agents.learned_policy import LearnedPolicy
    from invbench.agents.network import PolicyNet, architecture
    from invbench.agents.scaling import Scaling
    torch.manual_seed(0)
    scaling = Scaling(obs_scale=3.0, obs_shift=1.0, reward_offset=4.0, reward_scale=4.0, case_pack=1,
                      max_order_units=10, obs_clip=10.0, position_cap=20)
    LearnedPolicy(spec, scaling, PolicyNet(architecture(2, (16,), 11, "tanh", "logits")), agent="test").save(path)


def _states(n: int = 200, hi: int = 10) -> np.ndarray:
    return np.random.default_rng(3).integers(0, hi + 1, size=(n, 2))


def test_health_and_policies(server):
    client, d = server
    assert client.get("/health").json() == {"status": "ok", "policies": 4}
    listed = {p["name"]: p for p in client.get("/policies").json()}
    assert set(listed) == {"optimal", "base", "bells", "net"}
    for name, folder in (("optimal", "optimal"), ("base", "bs"), ("bells", "bells")):
        meta = json.loads((d / folder / "policy.json").read_text())
        assert listed[name]["digest"] == meta["digest"] and listed[name]["instance"] == meta["instance"]
    assert listed["base"]["kind"] == "classical" and listed["optimal"]["kind"] == "table"


@pytest.mark.parametrize("name, folder", [("optimal", "optimal"), ("base", "bs"), ("net", "net")])
def test_orders_equal_policy_act_one_by_one_and_in_batches(server, name, folder):
    client, d = server
    pol = invbench.load_policy(d / folder)
    states = _states()
    want = pol.act(states)
    got = [client.post("/v1/order", json={"policy": name, "state": s.tolist()}).json()["order"] for s in states[:60]]
    assert got == want[:60].tolist()
    batch = client.post("/v1/order", json=[{"policy": name, "state": s.tolist()} for s in states])
    assert batch.status_code == 200
    assert [a["order"] for a in batch.json()] == want.tolist()


def test_a_batch_may_mix_policies(server):
    client, d = server
    opt, base = invbench.load_policy(d / "optimal"), invbench.load_policy(d / "bs")
    states = _states(40)
    body = [{"policy": "optimal" if i % 2 else "base", "state": s.tolist()} for i, s in enumerate(states)]
    got = [a["order"] for a in client.post("/v1/order", json=body).json()]
    want = [int((opt if i % 2 else base).act(s[None])[0]) for i, s in enumerate(states)]
    assert got == want


@pytest.mark.parametrize("body, field", [
    ({"policy": "optimal", "state": [4, -1]}, "state[1]: must be a whole number of units in [0, 1000000000]"),
    ({"policy": "optimal", "state": [4, 2.5]}, "state[1]"),
    ({"policy": "optimal", "state": [4, True]}, "state[1]"),
    ({"policy": "optimal", "state": [4, "3"]}, "state[1]"),
    ({"policy": "optimal", "state": [4]}, "state: must be a list of 2 whole numbers"),
    ({"policy": "optimal", "state": [4, 5, 6]}, "state: must be a list of 2"),
    ({"policy": "optimal", "state": [4, 10**12]}, "state[1]"),
    ({"policy": "optimal"}, "state: must be a list"),
    ({"policy": "nope", "state": [1, 1]}, "policy: must be one of optimal, base, bells, net"),
    ({"policy": "optimal", "state": [1, 1], "extra": 1}, "extra: unknown key"),
    ([{"policy": "optimal", "state": [1, 1]}, {"policy": "base", "state": [1, -2]}], "[1].state[1]"),
    ([], "body: a list of 1 to"),
])
def test_bad_states_get_422_naming_the_field(server, body, field):
    client, _ = server
    r = client.post("/v1/order", json=body)
    assert r.status_code == 422, r.text
    assert r.json()["detail"].startswith(field) or field in r.json()["detail"], r.json()


def test_invalid_json_gets_422(server):
    client, _ = server
    r = client.post("/v1/order", content=b'{"policy": "optimal"', headers={"content-type": "application/json"})
    assert r.status_code == 422 and r.json()["detail"].startswith("body: not valid JSON")


def test_state_off_a_reachable_table_gets_422_never_zero(server):
    client, d = server
    pol = invbench.load_policy(d / "bells")
    covered = pol.index.states[:, 0]
    y = int(covered.min()) - 3  # an inventory position below every reachable one
    assert y > -10**9
    r = client.post("/v1/order", json={"policy": "bells", "state": [y]})
    assert r.status_code == 422 and "not in the saved table" in r.json()["detail"], r.text
    ok = client.post("/v1/order", json={"policy": "bells", "state": [int(covered[0])]})
    assert ok.json()["order"] == int(pol.act(np.array([[covered[0]]]))[0])


def test_tampered_policy_is_refused_at_start(tmp_path):
    spec = spec_from_dict(SPEC)
    d = invbench.save_policy(invbench.make_policy("base_stock", spec, S=9), tmp_path / "bs")
    meta = json.loads((d / "policy.json").read_text())
    meta["policy"]["params"]["S"] = 90
    (d / "policy.json").write_text(json.dumps(meta))
    proc = _start([str(d), "--port", str(_free_port())])
    try:
        out, err = proc.communicate(timeout=60)
    finally:
        _stop(proc)
    assert proc.returncode == 2
    assert len(err.strip().splitlines()) == 1 and "edited after export" in err and "Traceback" not in err, err
    assert out == ""


def test_port_in_use_is_one_line(tmp_path):
    spec = spec_from_dict(SPEC)
    d = invbench.save_policy(invbench.make_policy("base_stock", spec, S=9), tmp_path / "bs")
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        s.listen()
        proc = _start([str(d), "--port", str(s.getsockname()[1])])
        try:
            _, err = proc.communicate(timeout=60)
        finally:
            _stop(proc)
    assert proc.returncode == 2 and err.startswith("invbench: error: --port: cannot listen on 127.0.0.1:"), err
