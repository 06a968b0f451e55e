"""The compiled paths give the numbers of the straightforward numpy paths, for every model.

Compiled (numba): the batch step, the env's one-row step and the batch simulator
(`envs/models/compiled.py`, `envs/row_step.py`, `experiments/sim_kernels.py`). Straightforward:
the numpy step (`Rules.apply`, the model's `step`), the env's numpy step and the simulator's
numpy loop, run with `compiled.enabled(False)`. Outside references: scipy.stats for the demand
draw; the classical policies' own `act` for the linear order rules. Equal means: next states
and flows identical, costs within 1e-9 (they are in fact equal to the last bit), the same seed
giving the same demand streams.
"""
from __future__ import annotations

import dataclasses

import gymnasium as gym
import numpy as np
import pytest
from scipy import stats

import invbench  # noqa: F401  (registers the env ids)
from invbench.baselines.policies.registry import make_policy
from invbench.envs.errors import SpecError
from invbench.envs.models import MODELS
from invbench.envs.models import compiled
from invbench.envs.row_step import RowStep
from invbench.envs.spec import spec_from_dict
from invbench.experiments.policy_kernels import linear_orders
from invbench.experiments.sim_kernels import compiled_costs, guide_table, inverse_cdf
from invbench.experiments.simulate import simulate

#: instances of every model: lead times 0, 1 and longer, fixed order cost, case pack, LIFO,
#: several order slots (dual sourcing, the serial chain) and zero lead times in the chain
VARIANTS = {
    "lost_sales": [{"lead_time": 0}, {"lead_time": 1, "fixed_order_cost": 4.0},
                   {"lead_time": 3, "case_pack": 3, "unit_order_cost": 0.5, "fixed_order_cost": 2.0}],
    "backorder": [{"lead_time": 0, "case_pack": 2}, {"lead_time": 2, "fixed_order_cost": 5.0},
                  {"lead_time": 4, "unit_order_cost": 1.0}],
    "perishable": [{"lead_time": 0, "shelf_life": 3}, {"lead_time": 1, "shelf_life": 1},
                   {"lead_time": 2, "shelf_life": 3, "issuing": "lifo", "fixed_order_cost": 3.0, "case_pack": 2}],
    "dual_sourcing": [{"lead_time": 1, "expedited_lead_time": 0}, {"lead_time": 3, "expedited_lead_time": 1},
                      {"lead_time": 4, "expedited_lead_time": 2}],
    "serial": [{"lead_times": [0, 0]}, {"lead_times": [2, 1], "holding_costs": [2.0, 1.5]},
               {"lead_times": [1, 0, 2], "holding_costs": [3.0, 2.0, 1.0]}],
}
for _name in MODELS:  # a newly registered model is enrolled with its example instance
    VARIANTS.setdefault(_name, [{}])
CASES = [(name, i) for name in sorted(MODELS) for i in range(len(VARIANTS[name]))]

#: linear order rules per model, with parameters (policy name, params)
POLICIES = {
    "lost_sales": [("base_stock", {"S": 14}), ("s_S", {"s": 6, "S": 15}), ("capped_base_stock", {"S": 16, "r": 3}),
                   ("constant_order", {"r": 1})],
    "backorder": [("base_stock", {"S": 9}), ("s_S", {"s": 2, "S": 12}), ("capped_base_stock", {"S": 10, "r": 4})],
    "perishable": [("base_stock", {"S": 7}), ("capped_base_stock", {"S": 8, "r": 2}), ("constant_order", {"r": 2})],
    "dual_sourcing": [("dual_index", {"S_e": 2, "S_r": 5}), ("capped_dual_index", {"S_e": 2, "S_r": 5, "r": 1}),
                      ("tailored_base_surge", {"r": 0, "S_e": 3}), ("single_regular", {"S": 6}),
                      ("single_expedited", {"S": 3})],
    "serial": [("echelon_base_stock", {"s": [3, 7]}), ("installation_base_stock", {"r": [3, 4]})],
}
POLICY_CASES = [(name, i, j) for name in sorted(MODELS) for i in range(len(VARIANTS[name]))
                for j in range(len(POLICIES.get(name, [])))]


def spec_of(name: str, i: int, **more):
    variant = dict(VARIANTS[name][min(i, len(VARIANTS[name]) - 1)])
    if name == "serial" and len(variant["lead_times"]) == 2:
        variant.setdefault("holding_costs", [2.0, 1.0])
    return spec_from_dict({"model": name, **MODELS[name].example, **variant, **more})


def policy_of(spec, name: str, j: int):
    pname, params = POLICIES[name][j]
    # a cap or constant order r counts case packs here (legal sizes only); a serial chain's
    # list of levels gets one more entry per extra stage
    N = len(spec.lead_times) if spec.model == "serial" else 0
    fixed = {k: (list(v) + [v[-1] + 2] * (N - len(v)) if isinstance(v, list) else
                 v * spec.case_pack if k == "r" else v) for k, v in params.items()}
    return make_policy(spec, pname, fixed)


def random_inputs(spec, B: int, seed: int):
    rng = np.random.default_rng(seed)
    low = np.maximum(spec.model_def.state_low(spec), -12).astype(int)
    state = np.column_stack([rng.integers(lo, 25, B) for lo in low]).astype(np.int64)
    action = np.column_stack([rng.choice(s.sizes_units, B) for s in spec.order_slots]).astype(np.int64)
    demand = rng.integers(0, 20, B)
    return state, action, demand


def assert_same_outcome(a, b):
    assert list(a.costs) == list(b.costs) and list(a.flows) == list(b.flows)
    for k in a.costs:
        assert np.allclose(a.costs[k], b.costs[k], rtol=0, atol=1e-9) and np.array_equal(a.costs[k], b.costs[k]), k
    for k in a.flows:
        assert np.array_equal(a.flows[k], b.flows[k]), k


@pytest.mark.parametrize("name,i", CASES)
def test_compiled_batch_step_equals_numpy_step(name, i):
    spec = spec_of(name, i)
    step = compiled.compiled_step(spec)
    if spec.model_def.rules is None:  # a model without rules.py has no compiled path (numpy only)
        assert step is None and RowStep.for_spec(spec) is None
        return
    assert step is not None
    for seed in range(3):
        state, action, demand = random_inputs(spec, 300, seed)
        n1, o1 = spec.model_def.step(spec, state, action, demand)
        n2, o2 = step(state, action, demand)
        assert np.array_equal(n1, n2)
        assert_same_outcome(o1, o2)


@pytest.mark.parametrize("name,i,j", POLICY_CASES)
def test_linear_order_rule_equals_the_policys_act(name, i, j):
    spec = spec_of(name, i)
    pol = policy_of(spec, name, j)
    lin = linear_orders(pol, spec)
    assert lin is not None
    state, _, _ = random_inputs(spec, 500, 7)
    expected = np.asarray(pol.act(state.astype(np.float32)), dtype=np.int64).reshape(len(state), -1)
    assert np.array_equal(lin.orders(state), expected)


@pytest.mark.parametrize("name,i,j", POLICY_CASES)
def test_compiled_simulation_equals_numpy_simulation(name, i, j):
    spec = spec_of(name, i)
    pol = policy_of(spec, name, j)
    kw = dict(replications=40, periods=150, warmup=20, seed=11)
    fast = simulate(spec, pol, **kw)
    with compiled.enabled(False):
        slow = simulate(spec, pol, **kw)
    assert linear_orders(pol, spec) is not None  # the whole run compiled
    assert fast.parts.keys() == slow.parts.keys()
    assert abs(fast.cost - slow.cost) <= 1e-9 and fast.cost == slow.cost
    assert np.array_equal(fast.per_replication, slow.per_replication)
    assert all(abs(fast.parts[k] - slow.parts[k]) <= 1e-9 for k in slow.parts)


@pytest.mark.parametrize("name", sorted(POLICIES))
def test_discounted_start_state_and_python_policy_runs_agree(name):
    discounted = "discount" not in MODELS[name].unused_common  # the serial chain has no discount
    spec = spec_of(name, 1, **({"discount": 0.9} if discounted else {}))
    pol = policy_of(spec, name, 0)
    start = random_inputs(spec, 1, 3)[0][0]
    kw = dict(replications=16, periods=120, warmup=5, seed=2, start=start)
    with compiled.enabled(False):
        slow = simulate(spec, pol, **kw)
    fast = simulate(spec, pol, **kw)  # whole run compiled
    mixed = simulate(spec, lambda obs: pol.act(obs), **kw)  # a plain callable: Python policy, compiled step
    for res in (fast, mixed):
        assert res.criterion == slow.criterion == ("discounted" if discounted else "average")
        assert np.array_equal(res.per_replication, slow.per_replication)


def test_optimal_table_runs_with_the_compiled_step():
    from invbench.baselines.exact import solve
    spec = spec_of("lost_sales", 1)
    pol = solve(spec).policy  # a table: not a linear order rule, so Python orders, compiled step
    assert linear_orders(pol, spec) is None
    kw = dict(replications=30, periods=200, warmup=20, seed=9)
    with compiled.enabled(False):
        slow = simulate(spec, pol, **kw)
    assert np.array_equal(simulate(spec, pol, **kw).per_replication, slow.per_replication)


def test_policy_built_for_another_instance_is_not_run_compiled():
    a, b = spec_of("lost_sales", 1), spec_of("lost_sales", 1, shortage_cost=19.0)
    assert linear_orders(make_policy(a, "base_stock", {"S": 9}), b) is None


@pytest.mark.parametrize("name,i", CASES)
def test_env_compiled_step_equals_numpy_step(name, i):
    spec = spec_of(name, i)
    with compiled.enabled(False):
        slow = gym.make(MODELS[name].env_id, spec=spec, episode_length=60)
    fast = gym.make(MODELS[name].env_id, spec=spec, episode_length=60)
    assert (fast.unwrapped._fast is not None) == (spec.model_def.rules is not None) and slow.unwrapped._fast is None
    o1, _ = slow.reset(seed=5)
    o2, _ = fast.reset(seed=5)
    pick = np.random.default_rng(1)
    for t in range(60):
        a = fast.action_space.sample() if pick.random() < 0.7 else fast.action_space.sample() * 0
        if t % 7 == 3 and np.ndim(a) == 0:
            a = int(a)  # plain Python int as well as numpy integers
        r1 = slow.step(a)
        r2 = fast.step(a)
        assert np.array_equal(r1[0], r2[0]) and r1[0].dtype == r2[0].dtype == np.float32
        assert r1[1:4] == r2[1:4]
        assert list(r1[4]) == list(r2[4]) and r1[4] == r2[4]
        assert all(type(r1[4][k]) is type(r2[4][k]) for k in r1[4])
        if t == 30:  # a reset in the middle starts both from the start state again
            slow.reset(seed=8)
            fast.reset(seed=8)


def test_env_refuses_bad_actions_on_the_compiled_path_too():
    env = gym.make("invbench/LostSales-v0").unwrapped
    env.reset(seed=0)
    n = env.action_space.n
    for bad in (-1, n, 1.5, True, "2"):
        with pytest.raises(SpecError, match="action"):
            env.step(bad)
    env.step(np.int32(n - 1))  # a legal index of another integer type is fine


def test_instances_the_rules_do_not_cover_fall_back_to_numpy(monkeypatch):
    # e.g. random lead times: `Rules.pack` gives None, and env and simulator use the numpy step
    spec = spec_of("lost_sales", 2)
    pol = make_policy(spec, "base_stock", {"S": 20})
    before = simulate(spec, pol, replications=10, periods=100, seed=4)
    model = MODELS["lost_sales"]
    monkeypatch.setattr(model, "rules", dataclasses.replace(model.rules, pack=lambda s: None), raising=False)
    assert compiled.compiled_step(spec) is None and RowStep.for_spec(spec) is None
    assert compiled_costs(spec, pol, np.zeros((2, spec.state_dim), dtype=np.int64), np.random.default_rng(0),
                          5, 0, False) is None
    after = simulate(spec, pol, replications=10, periods=100, seed=4)
    assert np.array_equal(before.per_replication, after.per_replication)
    env = gym.make("invbench/LostSales-v0", spec=spec)
    assert env.unwrapped._fast is None
    env.reset(seed=0)
    assert env.step(2)[4]["order_units"] == 6  # index 2: two case packs of 3 units


def test_block_of_uniforms_is_the_per_period_stream():
    # what the compiled simulator relies on: one (T, R) draw = T draws of R in a row (numpy's Generator)
    a, b = np.random.default_rng(3), np.random.default_rng(3)
    assert np.array_equal(a.random((5, 97)), np.stack([b.random(97) for _ in range(5)]))
    assert a.random() == b.random(1)[0]  # the env draws one uniform at a time


@pytest.mark.parametrize("mean", [0.7, 5.0, 40.0])
def test_demand_draw_is_poisson_inverse_cdf(mean):
    # scipy.stats.poisson.ppf(u) is the smallest k with P(D <= k) >= u; away from the cdf's steps
    # (where the truncated pmf's rounding could differ) the draw must be exactly that
    spec = spec_from_dict({"model": "lost_sales", "demand": {"distribution": "poisson", "mean": mean}})
    cdf = spec.demand.pmf().cdf()
    guide = guide_table(cdf)
    u = np.random.default_rng(0).random(3000)
    steps = stats.poisson(mean).cdf(np.arange(len(cdf)))
    away = np.min(np.abs(u[:, None] - steps[None, :]), axis=1) > 1e-8
    ours = np.array([inverse_cdf(cdf, guide, x) for x in u])
    assert np.array_equal(ours[away], stats.poisson(mean).ppf(u[away]).astype(int))
    assert np.array_equal(ours, spec.demand.from_uniforms(u))
