"""The Gymnasium envs against the gymnasium and stable-baselines3 env checkers, vector envs."""
import gymnasium as gym
import numpy as np
import pytest
from gymnasium.utils.env_checker import check_env as gym_check_env
from stable_baselines3.common.env_checker import check_env as sb3_check_env

import invbench
from invbench import SpecError

IDS = ["invbench/LostSales-v0", "invbench/Backorder-v0"]


@pytest.mark.parametrize("env_id", IDS)
@pytest.mark.parametrize("L", [0, 1, 3])
def test_passes_gymnasium_and_sb3_checkers(env_id, L):
    gym_check_env(gym.make(env_id, lead_time=L, case_pack=2, max_order=20).unwrapped)  # gymnasium's checker
    sb3_check_env(gym.make(env_id, lead_time=L), warn=True)  # stable-baselines3's checker


@pytest.mark.parametrize("env_id", IDS)
def test_sync_vector_env_and_native_vector_env(env_id):
    sync = gym.vector.SyncVectorEnv([lambda: gym.make(env_id, lead_time=2) for _ in range(3)])
    obs, _ = sync.reset(seed=0)
    assert obs.shape == (3, 2)
    sync.step(np.array([1, 2, 3]))
    vec = gym.make_vec(env_id, num_envs=64, vectorization_mode="vector_entry_point", lead_time=2)
    obs, _ = vec.reset(seed=0)
    assert obs.shape == (64, 2)
    obs, r, term, trunc, info = vec.step(np.full(64, 5))
    assert r.shape == (64,) and not term.any()


@pytest.mark.parametrize("env_id", IDS)
def test_native_vector_env_matches_single_env_with_same_seed(env_id):
    single = gym.make(env_id, lead_time=3, episode_length=50).unwrapped
    vec = gym.make_vec(env_id, num_envs=1, vectorization_mode="vector_entry_point", lead_time=3, episode_length=50)
    o1, _ = single.reset(seed=11)
    o2, _ = vec.reset(seed=11)
    rng = np.random.default_rng(0)
    for _ in range(49):
        a = int(rng.integers(0, 10))
        o1, r1, *_ = single.step(a)
        o2, r2, *_ = vec.step(np.array([a]))
        assert np.array_equal(o1, o2[0]) and r1 == r2[0]


def test_reward_is_minus_cost_and_info_has_parts():
    env = gym.make("invbench/LostSales-v0", lead_time=1, shortage_cost=9.0, unit_order_cost=0.5,
                   fixed_order_cost=2.0)
    env.reset(seed=3)
    _, r, term, trunc, info = env.step(4)
    assert r == -(info["holding_cost"] + info["shortage_cost"] + info["ordering_cost"])
    assert info["ordering_cost"] == 0.5 * 4 + 2.0
    assert info["sales"] + info["lost"] == info["demand"]
    assert not term


def test_episode_truncates_not_terminates():
    env = gym.make("invbench/Backorder-v0", episode_length=5)
    env.reset(seed=0)
    flags = [env.step(0)[2:4] for _ in range(5)]
    assert flags[-1] == (False, True) and all(f == (False, False) for f in flags[:-1])


def test_spec_and_overrides_and_wrong_model():
    spec = invbench.load_spec({"model": "lost_sales", "lead_time": 2, "demand": {"distribution": "poisson", "mean": 3}})
    env = gym.make("invbench/LostSales-v0", spec=spec, shortage_cost=19.0)
    assert env.unwrapped.spec_.shortage_cost == 19.0 and env.unwrapped.spec_.lead_time == 2
    with pytest.raises(SpecError, match="instance.model"):
        gym.make("invbench/Backorder-v0", spec=spec)
    assert invbench.make_env(spec).unwrapped.spec_ == spec
