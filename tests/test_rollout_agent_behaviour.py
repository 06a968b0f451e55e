"""The rollout agent's defaults on every model: its classical start, the honest choice of the
returned policy, the whole CPU budget used, several order slots through the same loop."""
from __future__ import annotations

import numpy as np
import pytest
import torch

from invbench.agents import load_policy, train
from invbench.baselines.exact import solve
from invbench.baselines.policies.registry import make_policy, policies_for_instance
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs.models import MODELS
from invbench.envs.spec import spec_from_dict

torch.set_num_threads(1)
QUIET = {"threads": 1, "progress": False}
FAST_CURVE = {"eval_replications": 4, "eval_periods": 50, "eval_warmup": 10, "curve_exact_max_states": 20_000}
SMALL = {"states_per_iteration": 100, "rollouts": 2, "epochs": 2, "chains": 20, **QUIET, **FAST_CURVE}
# backorders with a fixed order cost: Scarf (1960) showed an (s, S) policy is optimal
FIXED_COST = spec_from_dict({"model": "backorder", "lead_time": 1, "holding_cost": 1.0, "shortage_cost": 9.0,
                             "fixed_order_cost": 20.0, "demand": {"distribution": "poisson", "mean": 4}})


def test_fixed_cost_backorders_start_from_s_S_which_is_optimal(tmp_path):
    res = train(FIXED_COST, "rollout", steps=1, seed=0, out=tmp_path / "p", optimum=None,
                settings={**SMALL, "iterations": 1})
    assert res.start["name"] == "s_S"
    assert res.start["cpu_seconds"] >= 0 and "base_stock" in res.start["tried"]
    start = make_policy(FIXED_COST, "s_S", res.start["params"])
    # Outside fact (Scarf 1960, "The optimality of (S, s) policies in the dynamic inventory
    # problem"): the exact optimum equals the best (s, S) policy's cost.
    assert solve(FIXED_COST).cost == pytest.approx(evaluate_exact(FIXED_COST, start).cost, rel=1e-6)
    # the start is where the learning curve begins
    assert res.curve[0]["step"] == 0
    assert res.curve[0]["exact_cost"] == pytest.approx(evaluate_exact(FIXED_COST, start).cost, rel=1e-9)


def test_returned_policy_is_never_worse_than_the_start_on_the_judge(tmp_path):
    out = tmp_path / "p"
    res = train(FIXED_COST, "rollout", steps=10**12, seed=1, out=out, optimum=None,
                settings={**SMALL, "iterations": 3})
    start = make_policy(FIXED_COST, "s_S", res.start["params"])
    # the judge is exact here (small chains): recompute both costs independently of training
    assert evaluate_exact(FIXED_COST, res.policy).cost <= evaluate_exact(FIXED_COST, start).cost * (1 + 1e-9)
    assert res.rounds == 3 and res.chosen in ("classical", "final", "best")
    # whatever was chosen is saved in the one policy format and acts the same after loading
    x = np.random.default_rng(0).integers(-5, 25, size=(300, FIXED_COST.state_dim))
    np.testing.assert_array_equal(load_policy(out, FIXED_COST).act(x), res.policy.act(x))
    if res.chosen == "classical":
        assert res.policy.name == "s_S" and res.policy.params() == res.start["params"]


def test_classical_start_stays_when_no_round_beats_it(tmp_path):
    # one round from a handful of noisy labels cannot beat the optimal (s, S): the start comes back
    out = tmp_path / "p"
    res = train(FIXED_COST, "rollout", steps=1, seed=0, out=out, optimum=None,
                settings={**SMALL, "iterations": 1, "rollouts": 1, "states_per_iteration": 20, "epochs": 1})
    assert res.chosen == "classical" and res.policy.name == "s_S"
    assert res.to_dict()["policy"]["name"] == "s_S"
    back = load_policy(out, FIXED_COST)
    assert back.name == "s_S" and back.params() == res.policy.params()


def test_uses_the_whole_cpu_budget():
    # `iterations` is auto (no cap): the CPU budget ends the run, so more budget, more rounds
    runs = [train(FIXED_COST, "rollout", steps=10**12, seed=0, optimum=None, max_cpu_seconds=b,
                  settings={**SMALL, "start_share": 0.5}) for b in (4.0, 12.0)]
    assert runs[1].steps_done > runs[0].steps_done and runs[1].rounds > runs[0].rounds >= 1


@pytest.mark.parametrize("model", ["dual_sourcing", "serial"])
def test_several_order_slots_run_through_the_same_loop(model, tmp_path):
    spec = spec_from_dict({**MODELS[model].example, "model": model})
    res = train(spec, "rollout", steps=10**12, seed=0, optimum=None, select_best=False,
                settings={**SMALL, "iterations": 2, "states_per_iteration": 200, "epochs": 10})
    assert res.rounds == 2
    assert res.start["name"] in policies_for_instance(spec)  # a classical policy of this model, optimised
    x = np.random.default_rng(1).integers(0, 6, size=(200, spec.state_dim))
    orders = res.policy.act(x)
    assert orders.shape == (len(x), len(spec.order_slots))
    for j, slot in enumerate(spec.order_slots):
        assert np.isin(orders[:, j], slot.sizes_units).all()
