"""(s, S) under backorders against Zheng & Federgruen (1991), Operations Research 39(4)."""
import pytest

from invbench.baselines.policies import SSPolicy
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs import InstanceSpec, poisson


def test_worked_example_poisson_10():
    # Zheng & Federgruen (1991), worked example (from memory): Poisson demand mean 10, K = 64,
    # h = 1, p = 9, L = 0 -> s* = 6, S* = 40, average cost 35.02. Cap raised so it never binds.
    spec = InstanceSpec("backorder", poisson(10.0), lead_time=0, holding_cost=1.0, shortage_cost=9.0,
                        fixed_order_cost=64.0, max_order=200)
    pol = SSPolicy.optimize(spec)
    assert (pol.s, pol.S) == (6, 40)
    assert pol.optimum.method == "analytic"
    assert pol.optimum.cost == pytest.approx(35.02, abs=0.01)
    # The renewal-reward cost is that of the policy as the step function runs it.
    assert evaluate_exact(spec, pol).cost == pytest.approx(pol.optimum.cost, rel=1e-7)


def test_algorithm_finds_the_global_optimum():
    # Zheng & Federgruen (1991) prove the algorithm returns an optimal (s, S); check against
    # exhaustive exact evaluation of every pair in a box around it (small instance, L = 1).
    spec = InstanceSpec("backorder", poisson(3.0), lead_time=1, holding_cost=1.0, shortage_cost=5.0,
                        unit_order_cost=1.0, fixed_order_cost=10.0, max_order=60)
    pol = SSPolicy.optimize(spec)
    grid = {(s, S): evaluate_exact(spec, SSPolicy(spec, s, S)).cost
            for S in range(pol.S - 4, pol.S + 5) for s in range(pol.s - 4, min(pol.s + 5, S))}
    best = min(grid, key=grid.get)
    assert best == (pol.s, pol.S)
    assert pol.optimum.cost == pytest.approx(grid[best], rel=1e-7)
