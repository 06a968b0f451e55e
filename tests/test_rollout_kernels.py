"""The rollout agent's compiled loops (agents/rollout_kernels.py) against its numpy path.

Reference: the numpy path of `sample_states` / `rollout_q` (one call of the model's step on the
whole batch per period, the policy through `act_unique`) is the straightforward definition of
the method; the model's step itself is checked against published values elsewhere
(tests/reference/, tests/test_model_conformance.py). Here the compiled path must give the same
kept states exactly and the same Q values to 1e-9, and a training run the same policy.
"""
from __future__ import annotations

import dataclasses

import numpy as np
import pytest
import torch

from invbench.agents import rollout_kernels, train
from invbench.agents.forward import batch_index, net_arrays
from invbench.agents.learned_policy import LearnedPolicy
from invbench.agents.network import PolicyNet, architecture
from invbench.agents.rollout_agent import RolloutSettings, act_unique, order_up_to, rollout_q, sample_states
from invbench.agents.scaling import scaling_for
from invbench.agents.settings import CommonSettings
from invbench.baselines.policies import SSPolicy
from invbench.envs.models import MODELS, compiled
from invbench.envs.spec import spec_from_dict

torch.set_num_threads(1)


def _spec(model: str, **over):
    return spec_from_dict({**MODELS[model].example, "model": model, **over})


CASES = {
    "lost_sales": _spec("lost_sales", lead_time=3),
    "backorder_fixed_cost": _spec("backorder", lead_time=2, fixed_order_cost=5.0),
    "backorder_position_floor": _spec("backorder", lead_time=2, fixed_order_cost=5.0),
    "perishable": _spec("perishable"),
    "dual_sourcing": _spec("dual_sourcing"),
    "serial": _spec("serial"),
}


#: a floor (DQN's, Scaling.position_floor) near the cap (18), so it binds often: the kernel must apply it too
FLOORS = {"backorder_position_floor": 14}


def _net_policy(spec, seed: int = 0, floor: int | None = None) -> LearnedPolicy:
    scaling = dataclasses.replace(scaling_for(spec, CommonSettings()), position_floor=floor)
    torch.manual_seed(seed)
    arch = architecture(spec.state_dim, (16, 16), scaling.n_outputs, "tanh", "q_values",
                        scaling.slot_counts if scaling.n_slots > 1 else None)
    return LearnedPolicy(spec, scaling, PolicyNet(arch))


def _first_orders(spec, scaling, states):
    """Candidate first orders: every size (one slot) or every slot's sizes with the others at 0."""
    if scaling.n_slots == 1:
        return scaling.order_sizes_units
    k = scaling.n_slots
    blocks = []
    for j in range(k):
        b = np.zeros((len(states), scaling.slot_counts[j], k), dtype=np.int64)
        b[:, :, j] = scaling.slot_units(j)[None, :]
        blocks.append(b)
    return np.concatenate(blocks, axis=1)


def _both(fn):
    """fn() with the compiled paths on, then off (the numpy path)."""
    on = fn()
    with compiled.enabled(False):
        off = fn()
    return on, off


@pytest.mark.parametrize("memo", [None, (4, 16)])
@pytest.mark.parametrize("case", list(CASES))
def test_compiled_rollouts_equal_the_numpy_path(case, memo, monkeypatch):
    if memo is not None:  # a tiny decision memo: it grows, fills up, and the forward runs unmemoised
        monkeypatch.setattr(rollout_kernels, "MEMO", memo[0])
        monkeypatch.setattr(rollout_kernels, "MEMO_MAX", memo[1])
    spec = CASES[case]
    pol = _net_policy(spec, floor=FLOORS.get(case))
    s = RolloutSettings(states_per_iteration=90, chains=7, state_warmup=13, state_spacing=3)
    assert rollout_kernels.kernel_policy(pol.act, spec) is not None  # else this would compare numpy with numpy
    st_on, st_off = _both(lambda: sample_states(spec, pol.act, s, np.random.default_rng(3)))
    np.testing.assert_array_equal(st_on[0], st_off[0])
    assert st_on[1] == st_off[1]
    states = st_off[0]
    first = _first_orders(spec, pol.scaling, states)
    q_on, q_off = _both(lambda: rollout_q(spec, pol.act, states, first, 5, 12, np.random.default_rng(4)))
    assert q_on.shape == q_off.shape
    np.testing.assert_allclose(q_on, q_off, rtol=0, atol=1e-9)


@pytest.mark.parametrize("case", ["lost_sales", "backorder_fixed_cost"])
def test_linear_rules_run_in_the_kernel_with_the_same_numbers(case):
    spec = CASES[case]
    rules = [order_up_to(9, spec, 6)]
    if case == "backorder_fixed_cost":
        rules.append(SSPolicy(spec, s=4, S=11).act)  # a classical policy's bound act
    s = RolloutSettings(states_per_iteration=60, chains=6, state_warmup=10, state_spacing=2)
    for rule in rules:
        assert rollout_kernels.kernel_policy(rule, spec).mode == 0
        st_on, st_off = _both(lambda: sample_states(spec, rule, s, np.random.default_rng(1)))
        np.testing.assert_array_equal(st_on[0], st_off[0])
        sizes = np.arange(0, 7)
        q_on, q_off = _both(lambda: rollout_q(spec, rule, st_off[0], sizes, 4, 10, np.random.default_rng(2)))
        np.testing.assert_allclose(q_on, q_off, rtol=0, atol=1e-9)


def test_the_start_rule_is_simulated_compiled_with_the_same_cost():
    """The order-up-to start rule states its linear form, so `simulate` runs it compiled; the
    reference is the simulator's numpy loop (compiled paths off)."""
    from invbench.experiments.simulate import simulate
    spec = CASES["lost_sales"]
    rule = order_up_to(9, spec, 6)
    assert rollout_kernels.linear_orders(rule, spec) is not None
    on, off = _both(lambda: simulate(spec, rule, replications=8, periods=300, warmup=20, seed=3).cost)
    assert on == off


def test_random_lead_time_and_plain_callables_fall_back():
    spec = spec_from_dict({**MODELS["lost_sales"].variants["random_lead_time"], "model": "lost_sales"})
    pol = _net_policy(spec)
    assert rollout_kernels.compiled_rollout_q(spec, pol.act, np.zeros((1, spec.state_dim), dtype=np.int64),
                                              np.zeros((1, 1), dtype=np.int64), 1, 1, np.zeros((2, 1, 1, 1))) is None
    plain = lambda x: np.full(len(x), 2)  # noqa: E731 - a callable the kernel cannot see into
    assert rollout_kernels.kernel_policy(plain, CASES["lost_sales"]) is None
    # the fallback still runs (numpy path): Q has one value per state and size
    states = sample_states(spec, pol.act, RolloutSettings(states_per_iteration=20, chains=4, state_warmup=5),
                           np.random.default_rng(0))[0]
    q = rollout_q(spec, pol.act, states, np.arange(4), 3, 6, np.random.default_rng(0))
    assert q.shape == (20, 4) and np.isfinite(q).all()


def test_forward_agrees_with_torch_away_from_ties():
    """The float64 forward of forward.py against the network's own torch forward (float32):
    the same argmax wherever torch's two best scores differ by more than float32 rounding."""
    spec = CASES["lost_sales"]
    pol = _net_policy(spec, seed=5)
    x = np.random.default_rng(0).integers(0, 15, size=(2000, spec.state_dim))
    with torch.no_grad():
        scores = pol.net(torch.from_numpy(pol.scaling.features(x))).numpy()
    top2 = np.sort(scores, axis=1)[:, -2:]
    clear = (top2[:, 1] - top2[:, 0]) > 1e-4
    assert clear.mean() > 0.9
    ours = batch_index(net_arrays(pol.net, pol.scaling), x)[:, 0]
    np.testing.assert_array_equal(ours[clear], scores.argmax(axis=1)[clear])
    np.testing.assert_array_equal(act_unique(pol.act, x), pol.act(x))


def test_training_gives_the_same_policy_with_the_compiled_path_on_and_off(tmp_path, monkeypatch):
    spec = _spec("lost_sales", lead_time=1)
    settings = {"threads": 1, "progress": False, "states_per_iteration": 200, "rollouts": 4, "epochs": 5,
                "iterations": 2, "chains": 10, "eval_replications": 4, "eval_periods": 50, "eval_warmup": 10}
    # the last round's network (select_best=False): the classical start may otherwise be returned
    on = train(spec, "rollout", steps=10**9, seed=2, out=None, optimum=None, settings=settings, select_best=False)
    monkeypatch.setenv(rollout_kernels.NUMPY_ENV, "1")
    off = train(spec, "rollout", steps=10**9, seed=2, out=None, optimum=None, settings=settings, select_best=False)
    for name, t in on.policy.net.named_tensors().items():
        assert torch.equal(t, off.policy.net.named_tensors()[name]), name
    x = np.random.default_rng(0).integers(0, 12, size=(300, spec.state_dim))
    np.testing.assert_array_equal(on.policy.act(x), off.policy.act(x))
