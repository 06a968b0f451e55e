"""Every model through the agents: the public `ScaledEnv` wrapper passes gymnasium's and
stable-baselines3's env checkers, and `train` runs ppo (through the command line) / a2c / dqn
with a tiny budget on each model, saving a policy that `invbench evaluate` / `load_policy` read.

Sources: `gymnasium.utils.env_checker.check_env` and `stable_baselines3.common.env_checker.check_env`
(the libraries' own checkers); stable-baselines3's DQN accepts `Discrete` action spaces only
(its documentation), which is why it is refused on models with several orders per period.
"""
from __future__ import annotations

import warnings

import gymnasium as gym
import numpy as np
import pytest
import torch

import invbench
from invbench.agents import ScaledEnv, load_policy, train
from invbench.envs.errors import SpecError
from invbench.envs.models import MODELS
from invbench.envs.spec import spec_from_dict

torch.set_num_threads(1)

#: one small instance per model (the models' own examples; backorder's has a fixed order cost),
#: and lost sales with a random lead time
CASES = {name: {"model": name, **m.example} for name, m in MODELS.items()}
CASES["random_lead_time"] = {"model": "lost_sales", **MODELS["lost_sales"].variants["random_lead_time"]}
REQUIRED = {"lost_sales", "backorder", "perishable", "dual_sourcing", "serial", "random_lead_time"}

QUIET = {"threads": 1, "progress": False, "eval_replications": 4, "eval_periods": 50, "eval_warmup": 10,
         "curve_exact_max_states": 20_000}
TINY = {
    "ppo": ({"n_envs": 8, "n_steps": 16, "batch_size": 64, "n_epochs": 1}, 256),
    "a2c": ({"n_envs": 8, "n_steps": 4}, 128),
    "dqn": ({"n_envs": 4, "learning_starts": 32, "batch_size": 16, "buffer_size": 500}, 200),
}


def test_every_required_model_is_covered():
    assert REQUIRED <= set(CASES)
    assert CASES["backorder"].get("fixed_order_cost", 0) > 0


def _wrapped(case: str) -> ScaledEnv:
    spec = CASES[case]
    return ScaledEnv(gym.make(MODELS[spec["model"]].env_id, spec=spec))


@pytest.mark.parametrize("case", sorted(CASES))
def test_scaled_env_passes_gymnasium_and_sb3_checkers(case):
    from gymnasium.utils.env_checker import check_env as gymnasium_check_env
    from stable_baselines3.common.env_checker import check_env as sb3_check_env
    env = _wrapped(case)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        gymnasium_check_env(env, skip_render_check=True)
        sb3_check_env(env, warn=True)
    # the one expected remark: gymnasium notes that the env it checks is wrapped (it is, on purpose)
    others = [str(w.message) for w in caught if "different from the unwrapped version" not in str(w.message)]
    assert others == []


@pytest.mark.parametrize("case", sorted(CASES))
def test_scaled_env_is_the_scaling_of_the_raw_env(case):
    # The same seed through the raw env with the mapped action gives the same period: the wrapper
    # changes what the agent sees, never the inventory rules (the one step function).
    env = _wrapped(case)
    raw = gym.make(MODELS[CASES[case]["model"]].env_id, spec=CASES[case])
    sc = env.scaling
    obs, _ = env.reset(seed=3)
    raw_obs, _ = raw.reset(seed=3)
    rng = np.random.default_rng(0)
    for _ in range(30):
        np.testing.assert_allclose(obs, sc.features(raw_obs[None])[0])
        assert env.observation_space.contains(obs)
        a = env.action_space.sample() if sc.n_slots > 1 else int(rng.integers(sc.n_actions))
        inner = env.inner_action(a)
        obs, reward, _, _, info = env.step(a)
        raw_obs, neg_cost, _, _, raw_info = raw.step(inner)
        assert info["cost"] == pytest.approx(-neg_cost) and info["order_units"] == raw_info["order_units"]
        assert reward == pytest.approx(float(sc.reward(np.float64(info["cost"]))))
        np.testing.assert_array_equal(env.raw_state, raw_obs)
        if sc.position_cap > 0:  # an order never lifts the position above the cap
            assert raw_obs.sum() <= sc.position_cap + info["demand"]


def test_scaled_env_refuses_other_envs_and_bad_actions():
    with pytest.raises(SpecError, match="^env: must be an invbench env"):
        ScaledEnv(gym.make("CartPole-v1"))
    env = _wrapped("lost_sales")
    env.reset(seed=0)
    with pytest.raises(SpecError, match=r"^action: must be an integer in \[0, "):
        env.step(env.scaling.n_actions)
    with pytest.raises(SpecError, match="^settings.hidden: must be one of the scaling settings"):
        ScaledEnv(gym.make("invbench/LostSales-v0", spec=CASES["lost_sales"]), settings={"hidden": [8]})
    with pytest.raises(SpecError, match=r"^agent.obs_clip: must be >= 0"):
        ScaledEnv(gym.make("invbench/LostSales-v0", spec=CASES["lost_sales"]), settings={"obs_clip": -1})
    clipped = ScaledEnv(gym.make("invbench/LostSales-v0", spec=CASES["lost_sales"]), settings={"obs_clip": 3})
    assert clipped.observation_space.high.max() == 3
    two = _wrapped("serial")
    two.reset(seed=0)
    with pytest.raises(SpecError, match=r"^action: must be 2 integers in \[0, "):
        two.step([two.scaling.slot_counts[0], 0])


def test_scaled_env_offers_the_backorder_floor_when_asked():
    """Off by default; on, ordering nothing at a backlog lifts the position to the floor
    (agents/scaling.position_floor_for; tests/test_agents_position_floor.py checks the level)."""
    spec = {"model": "backorder", "lead_time": 1, "holding_cost": 1.0, "shortage_cost": 9.0, "fixed_order_cost": 40.0,
            "demand": {"distribution": "poisson", "mean": 4.0}}
    plain = ScaledEnv(gym.make("invbench/Backorder-v0", spec=spec))
    floored = ScaledEnv(gym.make("invbench/Backorder-v0", spec=spec), settings={"position_floor": True})
    assert plain.scaling.position_floor is None and floored.scaling.position_floor is not None
    floor = floored.scaling.position_floor
    backlog = np.full((1, plain.instance.state_dim), 0.0)
    backlog[0, 0] = floor - 7  # seven units below the floor, nothing in transit
    plain._raw = floored._raw = backlog
    assert plain.inner_action(0) == 0 and floored.inner_action(0) == 7
    with pytest.raises(SpecError, match=r"agent\.position_floor: must be"):
        ScaledEnv(gym.make("invbench/Backorder-v0", spec=spec), settings={"position_floor": "sometimes"})


def test_scaled_env_is_exported_from_the_package():
    assert invbench.ScaledEnv is ScaledEnv


def _agents_for(case: str) -> list[str]:
    spec = spec_from_dict(CASES[case])
    return ["ppo", "a2c"] + (["dqn"] if len(spec.order_slots) == 1 else [])


@pytest.mark.parametrize("case", sorted(CASES))
def test_cli_train_then_evaluate_on_every_model(case, tmp_path, capsys):
    # the command-line round trip with ppo: `invbench train` saves, `invbench evaluate` reads it
    from invbench.cli import main
    spec = spec_from_dict(CASES[case])
    path = tmp_path / "spec.toml"
    path.write_text(spec.to_toml())
    settings, steps = TINY["ppo"]
    sets = [a for k, v in {**QUIET, **settings}.items() for a in ("--set", f"{k}={v}")]
    out = tmp_path / "run"
    assert main(["train", str(path), "--steps", str(steps), "--out", str(out), "--no-optimum", *sets]) == 0
    assert main(["evaluate", str(path), "--policy", str(out), "--simulate", "--replications", "4",
                 "--periods", "50", "--warmup", "10", "--json"]) == 0
    assert '"cost"' in capsys.readouterr().out
    assert load_policy(out, spec).agent == "ppo"


@pytest.mark.parametrize("case,agent", [(c, a) for c in sorted(CASES) for a in _agents_for(c) if a != "ppo"])
def test_train_runs_on_every_model_and_saves_a_readable_policy(case, agent, tmp_path):
    spec = spec_from_dict(CASES[case])
    settings, steps = TINY[agent]
    out = tmp_path / f"{case}-{agent}"
    res = train(spec, agent, steps=steps, seed=0, out=out, settings={**QUIET, **settings}, optimum=None)
    assert res.steps_done >= steps and res.curve
    back = load_policy(out, spec)
    states = np.repeat(spec.model_def.start_state(spec), 5, axis=0)
    np.testing.assert_array_equal(back.act(states), res.policy.act(states))
    ev = invbench.evaluate(spec, back, method="simulate", replications=4, periods=50, warmup=10, seed=1)
    assert np.isfinite(ev.cost) and ev.cost >= 0


@pytest.mark.parametrize("case", [c for c in sorted(CASES) if len(spec_from_dict(CASES[c]).order_slots) > 1])
def test_dqn_is_refused_where_it_cannot_act(case):
    # SB3's DQN acts on Discrete spaces only; these models place several orders per period
    with pytest.raises(SpecError, match="^agent: dqn cannot train on the"):
        train(spec_from_dict(CASES[case]), "dqn", steps=100, settings=QUIET, optimum=None)
