"""The SB3 VecEnv over the batch simulator, checked against the single Gymnasium env."""
from __future__ import annotations

import gymnasium as gym
import numpy as np
import pytest
from scipy import stats

import invbench  # noqa: F401  (registers the env ids)
from invbench.agents.scaling import Scaling, position_cap_for
from invbench.agents.vec_env import InventorySB3VecEnv
from invbench.envs.spec import spec_from_dict

SPEC = spec_from_dict({"model": "lost_sales", "lead_time": 2, "shortage_cost": 9.0,
                       "demand": {"distribution": "poisson", "mean": 5}})


def test_same_seed_same_trajectory_as_single_env():
    # Reference: gymnasium's own single env (LostSales-v0) with the same seed and actions;
    # both must also autoreset at the time limit the same way (terminal obs, then the empty state).
    venv = InventorySB3VecEnv(SPEC, 1, scaling=None, episode_length=7, seed=11)
    env = gym.make("invbench/LostSales-v0", spec=SPEC, episode_length=7)
    o1 = venv.reset()
    o2, _ = env.reset(seed=11)
    actions = np.random.default_rng(3).integers(0, 12, size=30)
    for a in actions:
        o1, r1, d1, info = venv.step(np.array([a]))
        o2, r2, term, trunc, _ = env.step(int(a))
        assert d1[0] == (term or trunc)
        if d1[0]:
            assert info[0]["TimeLimit.truncated"] is True
            np.testing.assert_array_equal(info[0]["terminal_observation"], o2)
            o2, _ = env.reset()
        np.testing.assert_array_equal(o1[0], o2)
        assert r1[0] == pytest.approx(r2, rel=1e-6)


def test_many_copies_step_together_with_poisson_demand():
    # With order 0 and a full shelf, sales equal demand: the daily sales of 512 copies must look
    # Poisson(5) (scipy.stats reference: mean and a chi-square goodness of fit).
    spec = SPEC.with_(lead_time=0)
    venv = InventorySB3VecEnv(spec, 512, scaling=None, episode_length=50, seed=0)
    venv.reset()
    venv.inner._state[:, 0] = 10**6  # a shelf that never empties: cost = holding only
    stock = []
    for _ in range(3):
        obs, rew, _, _ = venv.step(np.zeros(512, dtype=np.int64))
        stock.append(obs[:, 0].astype(np.int64))
    demand = (10**6 - stock[0])
    assert demand.mean() == pytest.approx(5.0, abs=4 * np.sqrt(5 / 512))
    counts = np.bincount(np.minimum(demand, 12), minlength=13)
    probs = np.append(stats.poisson(5).pmf(np.arange(12)), stats.poisson(5).sf(11))
    assert stats.chisquare(counts, probs * 512).pvalue > 1e-3


def test_scaled_observations_rewards_and_position_cap():
    sc = Scaling(obs_scale=5.0, obs_shift=1.0, reward_offset=2.0, reward_scale=4.0, case_pack=1,
                 max_order_units=15, obs_clip=10.0, position_cap=12)
    venv = InventorySB3VecEnv(SPEC, 4, scaling=sc, episode_length=20, seed=1)
    obs = venv.reset()
    np.testing.assert_allclose(obs, -1.0)  # empty state -> 0 / 5 - 1
    assert venv.action_space.n == 16
    raw = InventorySB3VecEnv(SPEC, 4, scaling=None, episode_length=20, seed=1)
    raw.reset()
    obs, rew, _, _ = venv.step(np.full(4, 15))
    _, raw_rew, _, _ = raw.step(np.full(4, 15))  # same seed: same demands, raw reward = -cost
    # position cap 12: the order of 15 is cut to 12, now in the pipeline (state[:, 1] for L = 2)
    np.testing.assert_allclose(obs[:, 1], 12 / 5 - 1)
    np.testing.assert_allclose(rew, -(-raw_rew - 2.0) / 4.0, rtol=1e-6)
    # the automatic cap lies above the backorder critical-fractile level (common practice bound)
    ratio = 9.0 / 10.0
    assert position_cap_for(SPEC) > stats.poisson(15).ppf(ratio)
