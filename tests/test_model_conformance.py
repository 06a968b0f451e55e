"""Every registered model passes the same checks: registering a model enrols it here.

Outside references: the Gymnasium and stable-baselines3 env checkers; the LP cross-check uses
scipy's HiGHS. The other checks compare the project's generic parts with one another (single env
= vector env, exact evaluation inside the simulation's CI, fast build = straightforward build,
optimum <= every classical policy) and conservation of units (common practice).
"""
from __future__ import annotations

import gymnasium as gym
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import invbench  # noqa: F401  (registers the env ids)
from invbench.baselines.exact import solve
from invbench.baselines.mdp import build_mdp
from invbench.baselines.policies.registry import make_policy, policies_for_instance
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs.models import MODELS
from invbench.envs.models.exact_space import ExactSpace
from invbench.envs.random_inputs import PeriodInputs
from invbench.envs.spec import spec_from_dict
from invbench.experiments.simulate import simulate

NAMES = sorted(MODELS)
#: models whose exact space has a structured build of its own
FAST = [n for n in NAMES if type(MODELS[n].exact_space(spec_from_dict({"model": n, **MODELS[n].example}))
                                 ).fast_build is not ExactSpace.fast_build]


#: every model's example, and each named variant it declares (e.g. a random lead time)
CASES = [n for n in NAMES] + [f"{n}:{v}" for n in NAMES for v in MODELS[n].variants]


def example(case: str, **changes):
    name, _, variant = case.partition(":")
    base = MODELS[name].variants[variant] if variant else MODELS[name].example
    return spec_from_dict({"model": name, **base, **changes})


def model_of(case: str):
    return MODELS[case.partition(":")[0]]


@pytest.mark.parametrize("name", CASES)
def test_gymnasium_and_sb3_checkers_pass(name):
    from gymnasium.utils.env_checker import check_env
    from stable_baselines3.common.env_checker import check_env as sb3_check
    env = gym.make(model_of(name).env_id, spec=example(name))
    check_env(env.unwrapped, skip_render_check=True)  # Gymnasium's own checker
    sb3_check(env.unwrapped, warn=False)  # stable-baselines3's checker


@pytest.mark.parametrize("name", CASES)
def test_single_env_equals_vector_env_on_the_same_seed(name):
    spec = example(name)
    env = gym.make(model_of(name).env_id, spec=spec, episode_length=50)
    venv = gym.make_vec(model_of(name).env_id, num_envs=1, vectorization_mode="vector_entry_point",
                        spec=spec, episode_length=50)
    obs, _ = env.reset(seed=11)
    vobs, _ = venv.reset(seed=11)
    rng = np.random.default_rng(0)
    for _ in range(40):
        a = env.action_space.sample() if rng.random() < 0.5 else env.action_space.sample() * 0
        obs, r, _, _, _ = env.step(a)
        vobs, vr, _, _, _ = venv.step(np.asarray([a]))
        assert np.array_equal(obs, vobs[0]) and r == vr[0]


@pytest.mark.parametrize("name", CASES)
@settings(max_examples=60, deadline=None)
@given(data=st.data())
def test_units_are_conserved_and_costs_nonnegative(name, data):
    spec = example(name, max_order=6)
    model = model_of(name)
    B = data.draw(st.integers(1, 8))
    low = np.maximum(model.state_low(spec), -10).astype(int)
    state = np.array([[data.draw(st.integers(int(lo), 12)) for lo in low] for _ in range(B)], dtype=np.int64)
    sizes = [s.sizes_units for s in spec.order_slots]
    action = np.array([[data.draw(st.sampled_from(list(sz))) for sz in sizes] for _ in range(B)], dtype=np.int64)
    demand = np.array([data.draw(st.integers(0, 15)) for _ in range(B)], dtype=np.int64)
    inputs = PeriodInputs(spec)  # the model's other random inputs, from a drawn seed
    extra = inputs.draw(inputs.streams(data.draw(st.integers(0, 2**32))), B)
    nxt, out = model.step(spec, state, action, demand, **extra)
    # units in = units out (common practice): the position moves by the orders minus what left
    assert np.array_equal(model.position(spec, nxt),
                          model.position(spec, state) + model.units_in(out, action) - model.units_out(out, demand))
    assert nxt.shape == state.shape and np.all(nxt >= model.state_low(spec))
    assert set(out.costs) == set(model.cost_parts)
    assert all(np.all(v >= 0) for v in out.costs.values())
    assert np.array_equal(out.flows["sales"] + out.flows[model.shortfall] * (model.shortfall == "lost"),
                          demand) or model.shortfall != "lost"


@pytest.mark.parametrize("name", FAST)
def test_fast_build_equals_straightforward_build(name):
    spec = example(name)
    space = spec.model_def.exact_space(spec)
    b = space.initial_bounds()
    fast = space.fast_build(b)
    slow = build_mdp(space, b)
    assert np.array_equal(slow.states, fast.states) and np.array_equal(slow.pair_action, fast.pair_action)
    assert abs(slow.P - fast.P).max() <= 1e-15
    np.testing.assert_allclose(slow.cost_parts, fast.cost_parts, rtol=0, atol=1e-12)


@pytest.mark.parametrize("name", CASES)
def test_exact_evaluation_of_a_classical_policy_is_inside_the_simulation_ci(name):
    spec = example(name)
    pol = make_policy(spec, policies_for_instance(spec)[0])  # the first classical policy, optimised
    ex = evaluate_exact(spec, pol)
    sim = simulate(spec, pol, replications=60, periods=2000, warmup=200, seed=3)
    # 95 % CI with a 3-half-width margin, so only a real disagreement fails
    assert abs(ex.cost - sim.cost) <= 3 * sim.ci_halfwidth, (ex.cost, sim.cost, sim.ci_halfwidth)
    assert abs(sum(ex.parts.values()) - ex.cost) <= 1e-9 * max(ex.cost, 1)


@pytest.mark.parametrize("name", CASES)
def test_optimum_is_no_worse_than_any_classical_policy(name):
    spec = example(name)
    opt = solve(spec)
    assert opt.converged and opt.gap <= 1e-6
    ev = evaluate_exact(spec, opt.policy)
    assert abs(ev.cost - opt.cost) <= 1e-6 * opt.cost  # the table evaluates to its certified cost
    for pname in policies_for_instance(spec):
        try:
            pol = make_policy(spec, pname)
        except invbench.SpecError:
            continue  # not optimisable on this instance (the policy says why)
        cost = pol.optimum.cost if pol.optimum is not None else evaluate_exact(spec, pol).cost
        assert opt.lower <= cost * (1 + 1e-9), (pname, cost, opt.lower)


@pytest.mark.parametrize("name", CASES)
def test_rvi_agrees_with_lp_on_a_tiny_instance(name):
    # HiGHS (scipy.optimize.linprog) solves the average-cost LP of the same finite MDP
    spec = example(name)
    rvi, lp = solve(spec, method="rvi"), solve(spec, method="lp")
    assert abs(rvi.cost - lp.cost) <= 1e-6 * rvi.cost
