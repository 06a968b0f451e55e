"""Every registered model's saved policies (its optimum, its first classical policy and a
learned network, untrained but seeded: what it orders does not matter, only that it is served
exactly) answer
`invbench decide` and a real `invbench serve` process with the same orders as `policy.act` in
Python — one order per slot for the models with several (outside reference: none needed, the
check is that three routes to the same saved policy agree exactly)."""
from __future__ import annotations


import gymnasium as gym
import httpx
import numpy as np
import pytest

import invbench
from invbench.baselines.policies.registry import policies_for
from invbench.cli import main
from invbench.envs.models import MODELS
from invbench.envs.spec import spec_from_dict
from tests.test_service_http import _free_port, _start, _stop, wait_until_healthy

NAMES = sorted(MODELS)


def _visited_states(spec, policy, n: int = 30) -> np.ndarray:
    """States the saved policy itself visits from the empty start (all inside its table)."""
    env = gym.make(MODELS[spec.model].env_id, spec=spec)
    obs, _ = env.reset(seed=1)
    codec = env.unwrapped._codec
    out = []
    for _ in range(n):
        out.append(obs.astype(np.int64))
        order = np.asarray(policy.act(obs[None])).reshape(1, -1)
        idx = [int(np.searchsorted(s.sizes_units, order[0, j])) for j, s in enumerate(codec.slots)]
        obs, *_ = env.step(idx[0] if len(idx) == 1 else np.array(idx))
    return np.unique(np.array(out), axis=0)


def _save_network(spec, path) -> None:
    import torch

    from invbench.agents.learned_policy import LearnedPolicy
    from invbench.agents.network import PolicyNet, architecture
    from invbench.agents.scaling import scaling_for
    from invbench.agents.training import resolve_settings
    sc = scaling_for(spec, resolve_settings("rollout", {"reward_scale": 1.0, "reward_offset": 0.0}))
    heads = [len(s) for s in sc.slot_sizes] if getattr(sc, "slot_sizes", None) else [sc.n_actions]
    torch.manual_seed(0)
    net = PolicyNet(architecture(spec.state_dim, (16,), sum(heads), "tanh", "logits", heads))
    LearnedPolicy(spec, sc, net, agent="test").save(path)


KINDS = ("opt", "cls", "net")


@pytest.fixture(scope="module")
def saved(tmp_path_factory):
    d = tmp_path_factory.mktemp("every")
    out = {}
    for name in NAMES:
        spec = spec_from_dict({"model": name, **MODELS[name].example})
        invbench.save_policy(invbench.solve(spec), d / f"{name}-opt")
        invbench.save_policy(invbench.make_policy(policies_for(name)[0], spec), d / f"{name}-cls")
        _save_network(spec, d / f"{name}-net")
        out[name] = spec
    return d, out


@pytest.mark.parametrize("name", NAMES)
def test_decide_answers_what_the_policy_orders(saved, name, capsys):
    d, specs = saved
    for kind in KINDS:
        pol = invbench.load_policy(d / f"{name}-{kind}")
        for s in _visited_states(specs[name], pol)[:8]:
            assert main(["decide", str(d / f"{name}-{kind}"), "--state=" + ",".join(map(str, s)), "--json"]) == 0
            got = capsys.readouterr().out
            want = np.asarray(pol.act(s[None])).reshape(-1).tolist()
            assert all(str(v) in got for v in want), (got, want)


def test_one_server_serves_every_model(saved):
    d, specs = saved
    args = [f"{n}-{k}={d / f'{n}-{k}'}" for n in NAMES for k in KINDS]
    port = _free_port()
    proc = _start([*args, "--port", str(port)])
    try:
        url = wait_until_healthy(proc, port)
        with httpx.Client(base_url=url, timeout=10) as client:
            for n in NAMES:
                for k in KINDS:
                    pol = invbench.load_policy(d / f"{n}-{k}")
                    states = _visited_states(specs[n], pol)
                    body = [{"policy": f"{n}-{k}", "state": s.tolist()} for s in states]
                    r = client.post("/v1/order", json=body)
                    assert r.status_code == 200, r.text
                    want = np.asarray(pol.act(states))
                    got = np.asarray([a["order"] for a in r.json()]).reshape(want.shape)
                    np.testing.assert_array_equal(got, want)
    finally:
        _stop(proc)
    assert proc.poll() is not None
