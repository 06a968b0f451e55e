"""When learning-curve points are taken: at policy updates by default, every K steps when set.

Sources: stable-baselines3's on-policy loop (its documentation of `BaseCallback`): a rollout of
`n_envs * n_steps` environment steps is collected, then the policy is updated (`train()`), then
the next rollout starts (`on_rollout_start`); so every point of an unchanged-policy-free curve
sits on a multiple of `n_envs * n_steps`.
"""
from __future__ import annotations

import csv

import numpy as np
import pytest
import torch

from invbench.agents import train
from invbench.agents.callbacks import CURVE_COLUMNS, TrainingMonitor
from invbench.agents.settings import sb3_settings
from invbench.envs.spec import spec_from_dict

torch.set_num_threads(1)
SPEC = spec_from_dict({"model": "lost_sales", "lead_time": 1, "shortage_cost": 4.0,
                       "demand": {"distribution": "poisson", "mean": 3}})
FAST = {"threads": 1, "progress": False, "eval_replications": 4, "eval_periods": 50, "eval_warmup": 10,
        "curve_exact_max_states": 20_000, "n_envs": 8, "n_steps": 16, "batch_size": 64, "n_epochs": 1}


def test_points_sit_on_policy_updates_and_their_cpu_is_recorded(tmp_path):
    rollout = 8 * 16
    res = train(SPEC, "ppo", steps=6 * rollout, seed=0, out=tmp_path, settings=FAST, optimum=None)
    assert res.curve and all(r["step"] % rollout == 0 for r in res.curve)
    assert res.curve[-1]["step"] == res.steps_done
    # rows keep 4 decimals (at least 1e-4): allow that rounding per row
    assert sum(r["eval_cpu_seconds"] for r in res.curve) <= res.eval_cpu_seconds + 1e-4 * len(res.curve)
    assert 0 <= res.eval_cpu_seconds <= res.cpu_seconds
    with open(tmp_path / "learning_curve.csv", newline="") as f:
        assert tuple(csv.DictReader(f).fieldnames) == CURVE_COLUMNS


def test_a_set_eval_every_still_takes_points_every_k_steps():
    res = train(SPEC, "ppo", steps=256, seed=0, settings={**FAST, "eval_every": 64}, optimum=None)
    steps = [r["step"] for r in res.curve]
    # SB3 reports steps in whole vector steps (8 copies): a point at the first step >= each 64
    assert steps == [64, 128, 192, 256]


def test_seed_gives_the_same_policy_whatever_the_curve_settings():
    # the final policies (select_best=False): evaluation never moves the training's generators
    a = train(SPEC, "ppo", steps=512, seed=3, settings=FAST, optimum=None, select_best=False)
    b = train(SPEC, "ppo", steps=512, seed=3, settings={**FAST, "eval_every": 32}, optimum=None, select_best=False)
    states = np.random.default_rng(0).integers(0, 15, size=(200, SPEC.state_dim))
    np.testing.assert_array_equal(a.policy.act(states), b.policy.act(states))


class _Constant:
    def act(self, states):
        return np.zeros(len(states), dtype=np.int64)


def test_monitor_with_auto_points_skips_unchanged_policies_and_honours_force():
    s = sb3_settings("ppo", {"progress": False, "eval_replications": 2, "eval_periods": 20, "eval_warmup": 0,
                             "curve_exact": False, "checkpoint_every": 0})
    mon = TrainingMonitor(SPEC, s, steps=1000, out=None)
    for step in range(50, 1001, 50):  # steps without an update: the policy has not changed
        mon.advance(step, _Constant)
    assert mon.rows == []
    mon.advance(1000, _Constant, force=True)  # the rollout agent's call, once per round
    assert [r["step"] for r in mon.rows] == [1000]
    mon.close()


def test_an_exact_evaluation_that_ran_out_of_states_does_not_price_later_points(monkeypatch):
    # the first point's exact evaluation burns CPU and then exceeds its state budget; later points
    # are simulated only, so the CPU share must be judged on a simulated point's cost, or the
    # rest of a CPU-bounded run gets no points (seen: PPO, 120 CPU-s, two points in all)
    import time

    import invbench.baselines.policy_eval as policy_eval
    from invbench.envs.errors import BudgetError
    from invbench.experiments.simulate import simulate

    def too_big(*args, **kwargs):
        t0 = time.process_time()
        while time.process_time() - t0 < 0.5:
            pass
        raise BudgetError("over the state budget")

    monkeypatch.setattr(policy_eval, "evaluate_exact", too_big)
    s = sb3_settings("ppo", {"progress": False, "eval_replications": 2, "eval_periods": 20, "eval_warmup": 0,
                             "checkpoint_every": 0})
    mon = TrainingMonitor(SPEC, s, steps=10**12, out=None, max_cpu_seconds=10**6)
    simulate(SPEC, _Constant().act, replications=2, periods=20, warmup=0)  # compiled once, outside the points
    mon.record(128, _Constant())
    first = mon.rows[0]["eval_cpu_seconds"]
    assert first >= 0.5
    # training CPU that pays for two simulated points within the 10 % share, not for two like the first
    monkeypatch.setattr(mon, "train_cpu_seconds", lambda: 10 * (mon.eval_cpu + 0.2))
    assert mon.affordable(10**9, reserve=1)
    mon.record(10**9, _Constant())
    assert mon.rows[1]["eval_cpu_seconds"] < 0.1 and mon.rows[1]["exact_cost"] is None
    mon.close()


def test_an_unaffordable_first_point_leaves_the_final_measurement_as_the_curve():
    # a point of 1e5 x 9,010 simulated periods costs far more than 10 % of a one-update run: the only
    # row is then the final measurement (done anyway)
    res = train(SPEC, "ppo", steps=8, seed=0, settings={**FAST, "eval_replications": 10**5, "eval_periods": 9_000},
                optimum=None)
    assert len(res.curve) == 1 and res.curve[0]["cost"] == pytest.approx(res.measured["cost"])
    assert res.curve[0]["eval_cpu_seconds"] == 0.0


def test_auto_points_do_not_depend_on_cpu_readings():
    # the same seed gives the same curve steps and the same exported (best) policy, however busy
    # the machine: points are gated by a count of simulated periods, not by CPU time
    a = train(SPEC, "ppo", steps=6 * 128, seed=4, settings=FAST, optimum=None)
    b = train(SPEC, "ppo", steps=6 * 128, seed=4, settings=FAST, optimum=None)
    assert [r["step"] for r in a.curve] == [r["step"] for r in b.curve] and a.chosen == b.chosen
    states = np.random.default_rng(1).integers(0, 15, size=(200, SPEC.state_dim))
    np.testing.assert_array_equal(a.policy.act(states), b.policy.act(states))


def test_a_cpu_bounded_run_still_takes_points_at_updates():
    # the bench gives agents a near-endless step count and a CPU budget: the step marks
    # (1/20 of the steps) are never reached, so the points fall due every 1/20 of the CPU budget
    rollout = 8 * 16
    res = train(SPEC, "ppo", steps=10**12, seed=0, settings=FAST, optimum=None, max_cpu_seconds=4.0)
    points = [r for r in res.curve if r["eval_cpu_seconds"] > 0]
    assert len(points) >= 5, res.curve
    assert len(points) <= 22  # about 20 (1/20 of the budget each), plus the final point
    # still at policy updates; the last is the final policy's, wherever the budget stopped it
    assert all(r["step"] % rollout == 0 for r in points[:-1])


def test_dqn_epsilon_decays_over_the_cpu_budget_when_that_ends_the_run():
    # stable-baselines3's DQN decays epsilon linearly over `exploration_fraction` of the run,
    # measured as num_timesteps / total_timesteps (its documentation of `exploration_fraction`);
    # with 10**12 steps asked and a CPU budget, progress is counted in CPU instead
    from invbench.agents.callbacks import sb3_callback
    from invbench.agents.sb3_agents import extract_policy, make_model
    from invbench.agents.scaling import scaling_for

    s = sb3_settings("dqn", {**{k: v for k, v in FAST.items() if k not in ("n_steps", "n_epochs")},
                             "learning_starts": 100, "checkpoint_every": 0, "curve_exact": False})
    scaling = scaling_for(SPEC, s)
    model = make_model("dqn", SPEC, s, scaling, seed=0)
    mon = TrainingMonitor(SPEC, s, steps=10**12, out=None, max_cpu_seconds=3.0)
    model.learn(total_timesteps=10**12, callback=sb3_callback(mon, lambda: extract_policy(model, "dqn", SPEC, s, scaling)))
    mon.close()
    assert model.num_timesteps < 10**9  # the CPU budget ended it
    assert model.exploration_rate == pytest.approx(s.exploration_final_eps)
    # the learning rate decays with the same progress, to lr_final_share of its start (0 by default)
    lr = model.policy.optimizer.param_groups[0]["lr"]
    assert lr < 0.2 * float(s.learning_rate)
