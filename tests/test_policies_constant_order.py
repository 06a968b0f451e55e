"""Constant order: flow balance of its exact evaluation, search, and the backorder refusal."""
import numpy as np
import pytest

from invbench.baselines.policies import ConstantOrderPolicy
from invbench.baselines.policies.constant_order import evaluate_constant_order
from invbench.envs import InstanceSpec, SpecError, poisson


@pytest.mark.parametrize("L,r", [(0, 2), (1, 3), (2, 4)])
def test_long_run_sales_equal_the_constant_order(L, r):
    # Common practice (flow balance): a stable lost-sales system sells all it receives, so
    # lost units per period = mean demand - r and ordering cost = c r + K per period.
    spec = InstanceSpec("lost_sales", poisson(5.0), lead_time=L, holding_cost=1.0, shortage_cost=9.0,
                        unit_order_cost=0.5, fixed_order_cost=1.0)
    ev = evaluate_constant_order(spec, r)
    assert ev.shortage == pytest.approx(9.0 * (5.0 - r), rel=1e-6)
    assert ev.ordering == pytest.approx(0.5 * r + 1.0, rel=1e-9)


def test_optimize_finds_the_exhaustive_best():
    spec = InstanceSpec("lost_sales", poisson(6.0), lead_time=1, holding_cost=1.0, shortage_cost=3.0,
                        case_pack=2)
    pol = ConstantOrderPolicy.optimize(spec)
    costs = {r: evaluate_constant_order(spec, r).cost for r in (0, 2, 4)}  # stable: r < 6
    assert pol.r == min(costs, key=costs.get)
    assert pol.optimum.cost == pytest.approx(costs[pol.r], rel=1e-9)


def test_optimize_refuses_backorders_but_policy_can_be_built():
    spec = InstanceSpec("backorder", poisson(5.0), lead_time=1)
    with pytest.raises(SpecError, match=r"^instance\.model: constant_order"):
        ConstantOrderPolicy.optimize(spec)
    pol = ConstantOrderPolicy.from_params(spec, r=5)
    assert pol.act(np.zeros((3, 1))).tolist() == [5, 5, 5]
