"""The fast lost-sales build gives the same MDP as the straightforward build, and the same optimum."""
import numpy as np
import pytest

from invbench import solve
from invbench.baselines.mdp import build_mdp
from tests.conftest import lost_sales


@pytest.mark.parametrize("spec", [
    lost_sales(0, 9.0, fixed_order_cost=3.0, case_pack=2), lost_sales(1, 4.0), lost_sales(2, 19.0, max_order=7),
    lost_sales(3, 9.0, unit_order_cost=1.0), lost_sales(2, 9.0, case_pack=3, fixed_order_cost=2.0),
], ids=["L0-K-pack", "L1", "L2-cap", "L3-c", "L2-pack-K"])
def test_fast_build_equals_straightforward_build(spec):
    space = spec.model_def.exact_space(spec)
    b = space.initial_bounds()
    slow, fast = build_mdp(space, b), space.fast_build(b)
    assert np.array_equal(slow.states, fast.states)
    assert np.array_equal(slow.pair_order, fast.pair_order)
    assert abs(slow.P - fast.P).max() <= 1e-15
    np.testing.assert_allclose(slow.cost_parts, fast.cost_parts, rtol=0, atol=1e-12)


def test_fast_and_straightforward_solves_agree():
    spec = lost_sales(3, 19.0)
    a, b = solve(spec, fast=True), solve(spec, fast=False)
    assert abs(a.cost - b.cost) <= 1e-9
    assert np.array_equal(a.policy.orders, b.policy.orders)
