"""The matrix-free solver (a space's declared demand split) against the straightforward one.

Reference: the straightforward solve (`fast=False`), which steps every (state, order, demand)
through the model's one step function and iterates on the resulting transition matrix; both
run the same relative / discounted value iteration, so the bounds agree to rounding and the
optimal tables are identical. The declared split itself is checked against the step function
run row by row (`expectation.expected_step`).
"""
from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest

from invbench import load_spec, solve
from invbench.baselines.exact import reachable_states
from invbench.baselines.split_mdp import SplitMDP, build_split_mdp, check_against_step, split_estimate
from invbench.envs.errors import BudgetError
from invbench.envs.models import MODELS
from invbench.envs.models.demand_split import DemandSplit, fixed_lead_time
from invbench.envs.models.exact_space import Bounds
from tests.conftest import backorder, lost_sales


def dual(**kw):
    return load_spec({"model": "dual_sourcing", **MODELS["dual_sourcing"].example, **kw})


CASES = {
    "ls-L0-K-pack": lambda: lost_sales(0, 9.0, fixed_order_cost=3.0, case_pack=2),
    "ls-L1": lambda: lost_sales(1, 4.0),
    "ls-L2-cap": lambda: lost_sales(2, 19.0, max_order=7),
    "ls-L3-c": lambda: lost_sales(3, 9.0, mean=3.0, unit_order_cost=1.0),
    "ls-L2-pack-K": lambda: lost_sales(2, 9.0, case_pack=3, fixed_order_cost=2.0),
    "ls-L2-discounted": lambda: lost_sales(2, 9.0, mean=3.0, discount=0.9),
    "bo-L0": lambda: backorder(0, 9.0),
    "bo-L2-K": lambda: backorder(2, 9.0, fixed_order_cost=5.0),
    "bo-L3-pack-K": lambda: backorder(3, 19.0, case_pack=4, fixed_order_cost=10.0),
    "bo-L1-discounted": lambda: backorder(1, 9.0, discount=0.95),
    "dual-le0": lambda: dual(),
    "dual-le1": lambda: dual(lead_time=3, expedited_lead_time=1),
    "dual-le2": lambda: dual(lead_time=3, expedited_lead_time=2),
}


def _same(a, b) -> list[str]:
    """Every difference between the split and the straightforward solve (empty: the same)."""
    bad = []
    if not (isinstance(a.mdp, SplitMDP) and not isinstance(b.mdp, SplitMDP)):
        bad.append("paths")
    if (a.iterations, a.widenings, a.bounds) != (b.iterations, b.widenings, b.bounds):
        bad.append("iterations/widenings/bounds")
    bad += [key for key in ("cost", "lower", "upper") if not abs(getattr(a, key) - getattr(b, key)) <= 1e-9]
    if (a.states, a.pairs) != (b.states, b.pairs) or not np.array_equal(a.mdp.states, b.mdp.states):
        bad.append("states")
    if not np.array_equal(a.policy.orders, b.policy.orders) or not np.array_equal(a.choice, b.choice):
        bad.append("policy")
    if not np.array_equal(reachable_states(a.mdp, a.choice), reachable_states(b.mdp, b.choice)):
        bad.append("reachable states")
    return bad


@pytest.mark.parametrize("name", sorted(CASES))
def test_split_solve_equals_straightforward_solve(name):
    spec = CASES[name]()
    assert _same(solve(spec), solve(spec, fast=False)) == []


def test_backorder_full_pipeline_split_equals_straightforward():
    spec = backorder(2, 9.0, mean=2.0, fixed_order_cost=4.0)
    assert _same(solve(spec, full_pipeline=True), solve(spec, full_pipeline=True, fast=False)) == []


@pytest.mark.parametrize("spec, bounds", [(lost_sales(2, 9.0, mean=3.0), Bounds(6)),
                                          (backorder(2, 9.0, mean=3.0), Bounds(8, -2))], ids=["ls", "bo"])
def test_bounds_that_bind_are_widened_alike(spec, bounds):
    a, b = solve(spec, bounds=bounds), solve(spec, bounds=bounds, fast=False)
    assert a.widenings > 0
    assert _same(a, b) == []


@pytest.mark.parametrize("name", ["ls-L0-K-pack", "ls-L3-c", "bo-L3-pack-K", "dual-le1"])
def test_declared_split_matches_the_step_on_every_pair(name):
    spec = CASES[name]()
    space = spec.model_def.exact_space(spec)
    mdp = build_split_mdp(space, space.demand_split(), space.initial_bounds())
    assert check_against_step(space, space.demand_split(), mdp, states=np.arange(mdp.n_states)) == mdp.n_pairs


def test_a_wrong_split_is_refused():
    spec = lost_sales(2, 9.0, mean=3.0)
    space = spec.model_def.exact_space(spec)
    good = space.demand_split()
    wrong = DemandSplit(good.avail_from, good.rest_from[0] * 0, good.rest_from)  # forgets the arrival
    with pytest.raises(RuntimeError, match="declared split"):
        build_split_mdp(space, wrong, space.initial_bounds())


def test_models_without_a_split_and_random_lead_times_take_the_matrix_path():
    spec = load_spec({"model": "perishable", **MODELS["perishable"].example})
    assert spec.model_def.exact_space(spec).demand_split() is None
    assert not isinstance(solve(spec).mdp, SplitMDP)
    # a lead time given as a pmf (a second random input) is not one fixed integer
    assert fixed_lead_time(SimpleNamespace(lead_time=np.array([0.5, 0.5]))) is None
    assert fixed_lead_time(SimpleNamespace(lead_time=2)) == 2
    space = lost_sales(2, 9.0).model_def.exact_space(lost_sales(2, 9.0))
    space.spec = SimpleNamespace(lead_time=np.array([0.5, 0.5]))
    assert space.demand_split() is None


def test_budget_refusal_uses_the_split_estimate():
    spec = lost_sales(4, 9.0)
    space = spec.model_def.exact_space(spec)
    b = space.initial_bounds()
    est = split_estimate(space, b)
    assert est.states == space.estimate(b).states and est.bytes < space.estimate(b).bytes
    with pytest.raises(BudgetError, match="MiB"):
        solve(spec, max_memory_mb=est.bytes / 2**20 / 2)
    assert solve(spec, max_memory_mb=est.bytes / 2**20 * 1.01).states == est.states


def test_methods_the_split_path_does_not_carry_build_the_matrix():
    spec = lost_sales(2, 9.0, mean=2.0)
    res = solve(spec, method="lp")
    assert not isinstance(res.mdp, SplitMDP)
    assert abs(res.cost - solve(spec).cost) <= 1e-5 * res.cost


#: every registered model whose example's exact space declares a demand split
SPLIT_MODELS = sorted(n for n, m in MODELS.items()
                      if m.exact_space(load_spec({"model": n, **m.example})).demand_split() is not None)


def test_the_models_with_a_fixed_lead_time_and_one_demand_coordinate_declare_a_split():
    assert SPLIT_MODELS == ["backorder", "dual_sourcing", "lost_sales"]


@pytest.mark.parametrize("name", SPLIT_MODELS)
def test_every_declared_split_matches_the_step_and_the_straightforward_solve(name):
    spec = load_spec({"model": name, **MODELS[name].example})
    space = spec.model_def.exact_space(spec)
    mdp = build_split_mdp(space, space.demand_split(), space.initial_bounds())
    assert check_against_step(space, space.demand_split(), mdp, states=np.arange(mdp.n_states)) == mdp.n_pairs
    assert _same(solve(spec), solve(spec, fast=False)) == []
