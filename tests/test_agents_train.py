"""Training the agents: artefacts, reload, seeds, the PPO quality check, exact vs simulated cost."""
from __future__ import annotations

import json

import numpy as np
import pytest
import torch

from invbench.agents import load_policy, train
from invbench.agents.training import TRAIN_FILE
from invbench.baselines.policy import Policy
from invbench.envs.errors import BudgetError
from invbench.envs.spec import spec_from_dict

torch.set_num_threads(1)
L1P4 = spec_from_dict({"model": "lost_sales", "lead_time": 1, "shortage_cost": 4.0,
                       "demand": {"distribution": "poisson", "mean": 5}})
L2P9 = L1P4.with_(lead_time=2, shortage_cost=9.0)
QUIET = {"threads": 1, "progress": False}
FAST_CURVE = {"eval_replications": 4, "eval_periods": 50, "eval_warmup": 10, "curve_exact_max_states": 20_000}
TINY = {
    "ppo": ({"n_envs": 8, "n_steps": 16, "batch_size": 64, "n_epochs": 1}, 512),
    "a2c": ({"n_envs": 8, "n_steps": 4}, 256),
    "dqn": ({"n_envs": 4, "learning_starts": 64, "batch_size": 32, "buffer_size": 1000}, 400),
    "rollout": ({"states_per_iteration": 100, "rollouts": 2, "epochs": 2, "iterations": 2, "chains": 20}, 1),
}


def _states(n: int = 500) -> np.ndarray:
    return np.random.default_rng(1).integers(0, 20, size=(n, 2))


@pytest.mark.parametrize("agent", list(TINY))
def test_smoke_training_exports_and_reloads(agent, tmp_path):
    settings, steps = TINY[agent]
    out = tmp_path / agent
    # the rollout agent would return its classical start when that judges best (see
    # test_rollout_agent_behaviour.py); here the network it trained last is exported
    res = train(L2P9, agent, steps=steps, seed=0, out=out, settings={**QUIET, **settings, **FAST_CURVE},
                select_best=agent != "rollout")
    for name in ("policy.json", "weights.safetensors", "learning_curve.csv", TRAIN_FILE):
        assert (out / name).is_file(), name
    assert list((out / "checkpoints").iterdir()) or agent == "rollout"
    assert isinstance(res.policy, Policy)
    back = load_policy(out, L2P9)
    np.testing.assert_array_equal(back.act(_states()), res.policy.act(_states()))
    assert json.loads((out / TRAIN_FILE).read_text())["agent"] == agent
    orders = res.policy.act(_states())
    assert orders.dtype == np.int64 and orders.min() >= 0 and orders.max() <= res.policy.scaling.max_order_units
    assert res.curve and res.measured["cost"] > 0
    header = (out / "learning_curve.csv").read_text().splitlines()[0].split(",")
    assert {"cost", "ci_halfwidth", "exact_cost", "exact_gap_pct"} <= set(header)
    if agent == "rollout":  # a rollout policy is stable from the first round: its exact cost is on the curve
        assert res.curve[-1]["exact_cost"] == pytest.approx(res.measured["cost"], rel=1e-6)


@pytest.mark.parametrize("agent", ["ppo", "dqn"])
def test_extracted_network_acts_like_sb3(agent):
    # Reference: stable-baselines3's own deterministic `predict` on the same scaled observations.
    from invbench.agents.scaling import scaling_for
    from invbench.agents.sb3_agents import extract_policy, make_model
    from invbench.agents.settings import sb3_settings
    s = sb3_settings(agent, {**QUIET, "n_envs": 2})
    sc = scaling_for(L2P9, s)
    model = make_model(agent, L2P9, s, sc, seed=0)
    pol = extract_policy(model, agent, L2P9, s, sc)
    x = _states(2000)
    expected, _ = model.predict(sc.features(x), deterministic=True)
    np.testing.assert_array_equal(pol.action_index(x), expected)


def test_same_seed_same_policy():
    settings, steps = TINY["ppo"]
    a = train(L1P4, "ppo", steps=steps, seed=5, settings={**QUIET, **settings, **FAST_CURVE}, optimum=None)
    b = train(L1P4, "ppo", steps=steps, seed=5, settings={**QUIET, **settings, **FAST_CURVE}, optimum=None)
    for k, v in a.policy.net.named_tensors().items():
        assert torch.equal(v, b.policy.net.named_tensors()[k]), k


@pytest.mark.parametrize("agent", ["ppo", "dqn"])
def test_same_seed_same_policy_whatever_the_curve_and_checkpoints(agent, tmp_path):
    # Learning-curve evaluations and checkpoints have their own generators: how often they run
    # must not change what is learned (DQN also draws its exploration from numpy's generator).
    settings, steps = TINY[agent]
    base = {**QUIET, **settings, **FAST_CURVE}
    runs = [train(L1P4, agent, steps=steps, seed=3, optimum=None, select_best=False,
                  settings={**base, "eval_every": steps, "checkpoint_every": 0}),
            train(L1P4, agent, steps=steps, seed=3, optimum=None, select_best=False, out=tmp_path / "often",
                  settings={**base, "eval_every": steps // 8, "checkpoint_every": steps // 4, "curve_exact": False})]
    assert len(runs[1].curve) > len(runs[0].curve)
    for k, v in runs[0].policy.net.named_tensors().items():
        assert torch.equal(v, runs[1].policy.net.named_tensors()[k]), k


def test_train_refuses_bad_arguments_before_work(tmp_path):
    from invbench.envs.errors import SpecError
    blocker = tmp_path / "file"
    blocker.write_text("x")
    for kw, field in [({"out": blocker}, "out"), ({"out": blocker / "sub"}, "out"), ({"max_cpu_seconds": float("nan")},
                      "max_cpu_seconds"), ({"optimum": "x"}, "optimum"), ({"steps": 2.5}, "steps"), ({"seed": -1}, "seed")]:
        with pytest.raises(SpecError, match=f"^{field}"):
            train(L1P4, "rollout", **{"steps": 1, "settings": QUIET, **kw})
    with pytest.raises(BudgetError, match="agent.eval_replications"):
        train(L1P4, "ppo", steps=1, settings={**QUIET, "eval_replications": 10**6, "eval_periods": 10**7})


def _best_constant_order_cost(spec) -> float:
    # Constant-order policy as defined by Zipkin (2008, "Old and new methods for lost-sales
    # inventory systems", from memory): order r every period. Evaluated exactly; r >= mean
    # demand never lets the stock settle (common practice), so only r < mean is a candidate.
    from invbench.baselines.policy_eval import evaluate_exact
    costs = []
    for r in range(0, int(np.ceil(spec.demand.mean))):
        try:
            costs.append(evaluate_exact(spec, lambda o, r=r: np.full(len(o), r)).cost)
        except BudgetError:
            continue
    return min(costs)


def test_ppo_beats_best_constant_order_on_lost_sales_L1_p4():
    # the policy after 100k steps as it is (no best-checkpoint selection), exactly evaluated
    res = train(L1P4, "ppo", steps=100_000, seed=0, settings={**QUIET, "eval_every": 50_000, "checkpoint_every": 0},
                optimum=None, select_best=False)
    assert res.measured["method"] == "exact"
    assert res.measured["cost"] < _best_constant_order_cost(L1P4)


def test_exact_cost_of_learned_policy_matches_simulation():
    # Reference: the bench's independent Monte Carlo loop (experiments.simulate); the exact
    # stationary cost must lie inside its 99.9 % interval (3.3 half-widths of the 95 % CI / 1.96).
    from invbench.baselines.policy_eval import evaluate_exact
    from invbench.experiments.simulate import simulate
    settings, steps = TINY["rollout"]
    res = train(L2P9, "rollout", steps=steps, seed=0, settings={**QUIET, **settings}, optimum=None, select_best=False)
    exact = evaluate_exact(L2P9, res.policy).cost
    sim = simulate(L2P9, res.policy, replications=200, periods=2000, warmup=200, seed=3)
    assert abs(sim.cost - exact) <= sim.ci_halfwidth * 3.3 / 1.96


def test_state_by_state_comparison_adds_up_to_the_gap():
    # Average-cost performance-difference identity (Puterman 1994, from memory): the stationary
    # expectation of Q*(s, a) - Q*(s, a*) over the learned policy's chain equals g - g*.
    from invbench.agents import compare_with_optimal
    settings, steps = TINY["rollout"]
    res = train(L2P9, "rollout", steps=steps, seed=0, settings={**QUIET, **settings}, optimum=None, select_best=False)
    c = compare_with_optimal(L2P9, res.policy)
    assert 0 < c.share_states_differ <= 1 and c.states_differ > 0
    gap_abs = c.cost - c.optimum
    assert gap_abs > 0
    assert c.expected_regret == pytest.approx(gap_abs, rel=0.05 + 20 * c.uncovered_mass)
    assert c.to_dict()["worst"][0]["order"] != c.to_dict()["worst"][0]["optimal_order"]


def test_cli_train_round_trip(tmp_path, capsys):
    from invbench.cli import main
    spec = tmp_path / "spec.toml"
    spec.write_text(L1P4.to_toml() + "\n[agent]\nname = \"rollout\"\n[agent.rollout]\nstates_per_iteration = 100\n"
                    "rollouts = 2\nepochs = 2\nstart = \"rule\"\n")  # no classical start: a network is saved
    out = tmp_path / "run"
    rc = main(["train", str(spec), "--steps", "1", "--out", str(out), "--set", "threads=1", "--set", "progress=false",
               "--no-optimum"])
    assert rc == 0
    assert "policy exported to" in capsys.readouterr().out
    assert load_policy(out, L1P4).agent == "rollout"


def test_rollout_classifier_variant_exports_logits(tmp_path):
    settings, steps = TINY["rollout"]
    res = train(L2P9, "rollout", steps=steps, seed=0, out=tmp_path / "c", optimum=None, select_best=False,
                settings={**QUIET, **settings, **FAST_CURVE, "fit": "classify"})
    assert res.policy.net.arch["head"] == "logits"
    back = load_policy(tmp_path / "c")
    np.testing.assert_array_equal(back.act(_states()), res.policy.act(_states()))
