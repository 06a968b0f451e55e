"""Exact evaluation agrees with simulation of the same policy within the simulation's 95 % CI,
and the simulator is reproducible and uses common random numbers."""
import numpy as np
import pytest

from invbench import evaluate, solve
from invbench.baselines.policy_eval import evaluate_exact
from invbench.experiments.simulate import simulate
from tests.conftest import backorder, lost_sales


def base_stock(S, pack=1):
    # legal orders only: whole case packs (evaluators refuse anything else)
    return lambda obs: (np.maximum(S - obs.sum(axis=1), 0) // pack) * pack


@pytest.mark.parametrize("spec,policy", [
    (lost_sales(2, 9.0), base_stock(16)),
    (lost_sales(1, 4.0, fixed_order_cost=3.0), base_stock(9)),
    (backorder(1, 9.0, mean=4.0), base_stock(12)),
    (backorder(0, 9.0, mean=4.0, case_pack=3), base_stock(8, pack=3)),
], ids=["ls-L2", "ls-K", "bo-L1", "bo-pack"])
def test_exact_evaluation_within_simulation_ci(spec, policy):
    ex = evaluate_exact(spec, policy)
    sim = simulate(spec, policy, replications=60, periods=3000, warmup=200, seed=5)
    # 95 % CI: allow a 3-half-width margin so the test fails only on a real disagreement.
    assert abs(ex.cost - sim.cost) <= 3 * sim.ci_halfwidth, (ex.cost, sim.cost, sim.ci_halfwidth)
    assert abs(ex.holding + ex.shortage + ex.ordering - ex.cost) <= 1e-6 * ex.cost


def test_optimal_table_policy_evaluates_to_the_optimum():
    spec = lost_sales(3, 19.0)
    res = solve(spec)
    ev = evaluate(spec, res.policy, optimum=res)
    assert ev.method == "exact"
    assert res.lower - 1e-6 <= ev.cost <= res.upper + 1e-6
    assert abs(ev.gap) <= 1e-6


def test_simulation_reproducible_and_common_random_numbers():
    spec = lost_sales(2, 9.0)
    a = simulate(spec, base_stock(15), replications=10, periods=200, seed=3)
    b = simulate(spec, base_stock(15), replications=10, periods=200, seed=3)
    assert np.array_equal(a.per_replication, b.per_replication)
    # With common random numbers the difference between two close policies has far less noise
    # than either cost alone (common practice in simulation studies).
    c = simulate(spec, base_stock(16), replications=10, periods=200, seed=3)
    diff = c.per_replication - a.per_replication
    assert diff.std() < 0.5 * a.per_replication.std()


def test_auto_falls_back_to_simulation_for_unstable_policy():
    # ordering 8 a period against mean demand 5: stock grows without bound (common practice)
    spec = lost_sales(1, 9.0, max_order=20)
    ev = evaluate(spec, lambda obs: np.full(len(obs), 8), replications=10, periods=300)
    assert ev.method == "simulated" and "unstable" in ev.note


def test_constant_order_below_mean_is_evaluated_exactly_on_a_truncated_chain():
    # Its reachable stock is unbounded, but the stationary tail is negligible: the truncated
    # chain must agree with a long simulation within its CI.
    spec = lost_sales(2, 9.0, mean=4.0)
    pol = lambda obs: np.full(len(obs), 3)  # noqa: E731
    ex = evaluate_exact(spec, pol)
    assert ex.far_stock_level is not None and ex.far_stock_share <= 1e-9
    sim = simulate(spec, pol, replications=40, periods=5000, seed=2)
    assert abs(ex.cost - sim.cost) <= 3 * sim.ci_halfwidth
