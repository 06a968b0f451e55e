"""Base-stock: analytic backorder cost vs exact evaluation, lost-sales search vs exhaustive."""
import numpy as np
import pytest

from invbench.baselines.policies import BaseStockPolicy
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs import InstanceSpec, poisson


@pytest.mark.parametrize("L,q", [(0, 1), (1, 1), (2, 1), (0, 3), (2, 3)])
def test_backorder_analytic_cost_equals_exact_evaluation(L, q):
    # The formula (G from lead_time_cost, uniform position over a case pack, every demanded unit
    # ordered once) against the evaluator running the step function on the policy.
    spec = InstanceSpec("backorder", poisson(4.0), lead_time=L, holding_cost=1.0, shortage_cost=9.0,
                        unit_order_cost=0.5, fixed_order_cost=2.0, case_pack=q)
    pol = BaseStockPolicy.optimize(spec)
    assert pol.optimum.method == "analytic"
    ev = evaluate_exact(spec, pol)
    for part in ("cost", "holding", "shortage", "ordering"):
        assert getattr(pol.optimum, part) == pytest.approx(getattr(ev, part), rel=1e-7), part
    # ... and the chosen S is the best one (the cost is convex in S).
    for d in (-1, 1):
        assert evaluate_exact(spec, BaseStockPolicy(spec, pol.S + d)).cost > ev.cost


def test_lead_time_cost_refuses_lost_sales():
    # G(y) exists only when unmet demand is carried over (common practice: with lost sales the
    # cost at t + L depends on the whole pipeline, not on the position alone).
    from invbench.envs.models.backorder.lead_time_cost import lead_time_cost
    spec = InstanceSpec("lost_sales", poisson(4.0), lead_time=1, holding_cost=1.0, shortage_cost=9.0)
    with pytest.raises(ValueError, match="backorder unmet demand"):
        lead_time_cost(spec, np.arange(5))


@pytest.mark.parametrize("L", [0, 2])
def test_lost_sales_search_finds_exhaustive_best(L):
    # Common practice: the lost-sales base-stock cost is unimodal in S, so the local search from
    # the fractile level should reach the exhaustive minimum.
    spec = InstanceSpec("lost_sales", poisson(3.0), lead_time=L, holding_cost=1.0, shortage_cost=9.0)
    pol = BaseStockPolicy.optimize(spec)
    costs = {S: evaluate_exact(spec, BaseStockPolicy(spec, S)).cost for S in range(0, 20)}
    assert pol.S == min(costs, key=costs.get)
    assert pol.optimum.cost == pytest.approx(costs[pol.S], rel=1e-9)
    assert pol.optimum.evaluations < 10


def test_act_orders_up_to_S_in_case_packs_within_cap():
    spec = InstanceSpec("backorder", poisson(4.0), lead_time=2, case_pack=4, max_order=12)
    pol = BaseStockPolicy(spec, S=20)
    obs = np.array([[20, 0], [25, 3], [3, 2], [-30, 0], [10, 7]], dtype=np.float32)
    orders = pol.act(obs)
    assert orders.shape == (5,) and orders.dtype == np.int64
    # IP 20 -> 0; 28 -> 0; 5 -> 15 -> 12 (packs of 4); -30 -> 50 -> cap 12; 17 -> 3 -> 0.
    assert orders.tolist() == [0, 0, 12, 12, 0]
    assert pol.act(np.array([5, 2])).tolist() == [12]  # a single observation is a batch of one
