"""Agents on models that place several orders per period (dual sourcing, a 2-stage serial chain)."""
from __future__ import annotations

import json

import gymnasium as gym
import numpy as np
import pytest
import torch

import invbench  # noqa: F401  (registers the env ids)
from invbench.agents import load_policy, train
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs.errors import SpecError
from invbench.envs.models import MODELS
from invbench.envs.spec import spec_from_dict
from invbench.experiments.simulate import simulate

torch.set_num_threads(1)
SPECS = {m: spec_from_dict({**MODELS[m].example, "model": m}) for m in ("dual_sourcing", "serial")}
QUIET = {"threads": 1, "progress": False}
FAST_CURVE = {"eval_replications": 4, "eval_periods": 50, "eval_warmup": 10, "curve_exact_max_states": 20_000}
TINY = {
    "ppo": ({"n_envs": 8, "n_steps": 16, "batch_size": 64, "n_epochs": 1}, 512),
    "a2c": ({"n_envs": 8, "n_steps": 4}, 256),
    "rollout": ({"states_per_iteration": 300, "rollouts": 4, "epochs": 40, "iterations": 1, "chains": 20}, 1),
}


def _states(spec, n: int = 400) -> np.ndarray:
    return np.random.default_rng(1).integers(-4, 8, size=(n, spec.state_dim))


def _legal(spec, orders: np.ndarray) -> bool:
    return all(np.isin(orders[:, j], slot.sizes_units).all() for j, slot in enumerate(spec.order_slots))


@pytest.mark.parametrize("model", list(SPECS))
@pytest.mark.parametrize("agent", list(TINY))
def test_training_exports_reloads_and_evaluates(model, agent, tmp_path):
    spec = SPECS[model]
    settings, steps = TINY[agent]
    out = tmp_path / f"{model}-{agent}"
    # select_best=False: the rollout agent exports its last network even when its classical start judges best
    res = train(spec, agent, steps=steps, seed=0, out=out, optimum=None, settings={**QUIET, **settings, **FAST_CURVE},
                select_best=False)
    k = len(spec.order_slots)
    x = _states(spec)
    orders = res.policy.act(x)
    assert orders.shape == (len(x), k) and orders.dtype == np.int64 and _legal(spec, orders)
    back = load_policy(out, spec)
    np.testing.assert_array_equal(back.act(x), orders)
    meta = json.loads((out / "policy.json").read_text())
    assert len(meta["scaling"]["slot_sizes"]) == k and meta["architecture"]["heads"] == res.policy.scaling.slot_counts
    assert res.measured["cost"] > 0
    if agent == "rollout":
        # The rollout agent starts from a stable rule and is stable after one round, so its exact cost
        # exists; reference: an independent long CRN simulation of the same policy must agree.
        ex = evaluate_exact(spec, back)
        sim = simulate(spec, back, replications=64, periods=2000, warmup=200, seed=5)
        assert ex.cost == pytest.approx(sim.cost, abs=4 * sim.ci_halfwidth + 1e-6)


@pytest.mark.parametrize("agent", ["ppo", "a2c"])
def test_extracted_heads_act_like_sb3(agent):
    # Reference: stable-baselines3's own deterministic `predict` on a MultiDiscrete space.
    from invbench.agents.scaling import scaling_for
    from invbench.agents.sb3_agents import extract_policy, make_model
    from invbench.agents.settings import sb3_settings
    spec = SPECS["serial"]
    s = sb3_settings(agent, {**QUIET, "n_envs": 2})
    sc = scaling_for(spec, s)
    model = make_model(agent, spec, s, sc, seed=0)
    assert isinstance(model.action_space, gym.spaces.MultiDiscrete)
    pol = extract_policy(model, agent, spec, s, sc)
    x = _states(spec, 2000)
    expected, _ = model.predict(sc.features(x), deterministic=True)
    np.testing.assert_array_equal(pol.action_index(x), expected)


def test_same_seed_same_policy_with_several_slots(tmp_path):
    spec = SPECS["dual_sourcing"]
    settings, steps = TINY["ppo"]
    a, b = (train(spec, "ppo", steps=steps, seed=3, optimum=None, select_best=False,
                  settings={**QUIET, **settings, **FAST_CURVE}) for _ in range(2))
    for name, t in a.policy.net.named_tensors().items():
        assert torch.equal(t, b.policy.net.named_tensors()[name]), name


def test_vec_env_matches_the_gymnasium_env_on_two_slots():
    # Reference: gymnasium's own DualSourcing-v0 env, same seed and actions (MultiDiscrete).
    from invbench.agents.vec_env import InventorySB3VecEnv
    spec = SPECS["dual_sourcing"]
    venv = InventorySB3VecEnv(spec, 1, scaling=None, episode_length=50, seed=4)
    env = gym.make("invbench/DualSourcing-v0", spec=spec, episode_length=50)
    assert venv.action_space == env.action_space
    o1, (o2, _) = venv.reset(), env.reset(seed=4)
    for a in np.random.default_rng(2).integers(0, 5, size=(30, 2)):
        o1, r1, _, _ = venv.step(a[None, :])
        o2, r2, _, _, _ = env.step(a)
        np.testing.assert_array_equal(o1[0], o2)
        assert r1[0] == pytest.approx(r2, rel=1e-6)


def test_dqn_on_two_slots_is_refused_before_training(tmp_path):
    out = tmp_path / "never"
    with pytest.raises(SpecError) as e:
        train(SPECS["dual_sourcing"], "dqn", steps=100, out=out, settings=QUIET)
    msg = str(e.value)
    assert "\n" not in msg and "dqn" in msg and "MultiDiscrete" in msg
    assert not out.exists()


def test_cli_refuses_dqn_on_serial_with_exit_2(tmp_path, capsys):
    from invbench.cli import main
    spec = tmp_path / "spec.toml"
    spec.write_text(SPECS["serial"].to_toml())
    rc = main(["train", str(spec), "--agent", "dqn", "--steps", "10", "--out", str(tmp_path / "run")])
    err = capsys.readouterr().err.strip()
    assert rc == 2 and len(err.splitlines()) == 1 and "dqn" in err
    assert not (tmp_path / "run").exists()


def test_single_slot_folder_without_slot_sizes_still_loads(tmp_path):
    # A folder written before several slots existed has no scaling.slot_sizes: one slot is implied.
    from invbench.agents.export import write_json_atomic
    from invbench.baselines.artifact_io import digest
    spec = spec_from_dict({"model": "lost_sales", "lead_time": 1, "shortage_cost": 4.0,
                           "demand": {"distribution": "poisson", "mean": 2}})
    settings, steps = TINY["rollout"]
    res = train(spec, "rollout", steps=steps, seed=0, out=tmp_path / "p", optimum=None, select_best=False,
                settings={**QUIET, **settings, **FAST_CURVE, "states_per_iteration": 50, "epochs": 2})
    meta = json.loads((tmp_path / "p" / "policy.json").read_text())
    del meta["scaling"]["slot_sizes"]
    meta["digest"] = digest(meta)  # re-sealed as the earlier writer would have
    write_json_atomic(tmp_path / "p" / "policy.json", meta)
    x = np.random.default_rng(0).integers(0, 8, size=(100, spec.state_dim))
    np.testing.assert_array_equal(load_policy(tmp_path / "p", spec).act(x), res.policy.act(x))


def test_rollout_candidates_stay_small_and_heads_recover_the_joint_best():
    from invbench.agents.rollout_slots import PRODUCT_CAP, candidates, head_values
    from invbench.agents.scaling import Scaling
    small = Scaling(1.0, 1.0, 0.0, 1.0, 1, 4, slot_sizes=((0, 1, 2, 3, 4), (0, 1, 2)))
    cur = np.array([[1, 2], [4, 0]])
    first = candidates(small, cur)
    assert first.shape == (2, 15, 2)  # the whole product (15 <= 64)
    q = np.random.default_rng(0).random((2, 15))
    heads = head_values(small, first, q)
    for n in range(2):  # brute force over the product: each head's argmin is the joint argmin's slot
        best = first[n, q[n].argmin()]
        assert [int(v[n].argmin()) for v in heads] == best.tolist()
    big = Scaling(1.0, 1.0, 0.0, 1.0, 1, 9, slot_sizes=(tuple(range(10)),) * 3)
    first = candidates(big, np.array([[2, 3, 4]]))
    assert 10 ** 3 > PRODUCT_CAP and first.shape == (1, 30, 3)  # coordinate-wise: 10 + 10 + 10
    for j in range(3):  # block j varies slot j only; the others keep the current orders
        block = first[0, 10 * j:10 * (j + 1)]
        assert block[:, j].tolist() == list(range(10))
        assert all((block[:, i] == [2, 3, 4][i]).all() for i in range(3) if i != j)


def _poisson_multi_slot_instances():
    from invbench.experiments.suite import load_suite
    return [i for i in load_suite("agents-mixed").instances
            if len(i.order_slots) > 1 and i.demand.distribution == "poisson"]


@pytest.mark.parametrize("spec", _poisson_multi_slot_instances(), ids=lambda i: i.label)
def test_every_slot_is_bounded_by_the_one_period_demand_quantile(spec):
    # each head ends at the first legal size reaching the 0.9999 quantile of one period's demand
    # (the bound of one slot); reference quantile: scipy.stats.poisson.ppf
    from scipy import stats

    from invbench.agents.scaling import scaling_for
    from invbench.agents.settings import sb3_settings

    s = sb3_settings("ppo", {})
    q = int(stats.poisson.ppf(s.order_quantile, spec.demand.params["mean"]))
    sc = scaling_for(spec, s)
    for sizes, slot in zip(sc.slot_sizes, spec.order_slots):
        legal = [int(u) for u in slot.sizes_units]
        reach = next((u for u in legal if u >= q), legal[-1])
        assert list(sizes) == [u for u in legal if u <= reach]


def test_rollout_agent_covers_a_start_that_orders_beyond_the_slot_bound():
    # the start of a serial chain (echelon base stock) refills stage 1 with more than one
    # period's demand after stage 2 ran short: the heads widen to express it, and a state
    # whose start order lies beyond a head is snapped to it (this failed with an IndexError)
    from invbench.agents.rollout_agent import RolloutSettings
    from invbench.agents.scaling import scaling_for

    spec = next(i for i in _poisson_multi_slot_instances() if i.model == "serial")
    base = scaling_for(spec, RolloutSettings())
    res = train(spec, "rollout", steps=1, seed=0, optimum=None, select_best=False,
                settings={**QUIET, **TINY["rollout"][0], **FAST_CURVE})
    sizes = res.policy.scaling.slot_sizes
    assert all(len(w) >= len(b) for w, b in zip(sizes, base.slot_sizes))
    orders = res.policy.act(_states(spec))
    assert _legal(spec, orders)
