"""PIL and myopic: order shapes, case packs and caps on random states; PIL's special cases."""
import numpy as np
import pytest

from invbench.baselines.policies import BaseStockPolicy, MyopicPolicy, PILPolicy
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs import InstanceSpec, poisson


def _random_states(spec, n, rng):
    states = rng.integers(0, 25, size=(n, spec.state_dim))
    if spec.model == "backorder":
        states[:, 0] -= 10
    states[:, 1:] = np.minimum(states[:, 1:], spec.order_cap_units) // spec.case_pack * spec.case_pack
    return states


@pytest.mark.parametrize("cls", [PILPolicy, MyopicPolicy])
@pytest.mark.parametrize("model,L,q,cap", [("lost_sales", 2, 1, None), ("lost_sales", 3, 3, 9),
                                           ("backorder", 2, 4, 12), ("backorder", 0, 1, 5)])
def test_orders_are_legal_and_shaped(cls, model, L, q, cap):
    spec = InstanceSpec(model, poisson(4.0), lead_time=L, case_pack=q, max_order=cap,
                        fixed_order_cost=1.0, unit_order_cost=0.2)
    pol = cls(spec, 7.5) if cls is PILPolicy else cls(spec)
    states = _random_states(spec, 200, np.random.default_rng(3))
    orders = pol.act(states.astype(np.float32))
    assert orders.shape == (200,) and orders.dtype == np.int64
    assert np.all(orders % q == 0)
    assert np.all((orders >= 0) & (orders <= spec.order_cap_units))
    assert np.array_equal(pol.act(states), orders)  # cached and fresh paths agree
    assert pol.act(states[0]).shape == (1,)


def test_pil_without_lead_time_is_base_stock():
    # With L = 0 the order arrives at once, so the projected level is today's on-hand and PIL
    # with target T orders up to ceil(T): base-stock (van Jaarsveld & Arts 2024, from memory).
    spec = InstanceSpec("lost_sales", poisson(4.0), lead_time=0)
    states = np.arange(0, 15).reshape(-1, 1)
    assert np.array_equal(PILPolicy(spec, 6.25).act(states), BaseStockPolicy(spec, 7).act(states))


@pytest.mark.parametrize("L,q", [(1, 1), (2, 3)])
def test_pil_under_backorders_is_base_stock(L, q):
    # Common practice: under backorders the projection is linear (position minus mean demand
    # over L periods), so PIL orders exactly like base-stock; optimize uses that.
    spec = InstanceSpec("backorder", poisson(4.0), lead_time=L, case_pack=q)
    pil, base = PILPolicy.optimize(spec), BaseStockPolicy.optimize(spec)
    states = _random_states(spec, 300, np.random.default_rng(5))
    assert np.array_equal(pil.act(states), base.act(states))
    assert pil.optimum.cost == pytest.approx(evaluate_exact(spec, pil).cost, rel=1e-7)


def test_pil_lost_sales_search_matches_grid():
    spec = InstanceSpec("lost_sales", poisson(5.0), lead_time=1, holding_cost=1.0, shortage_cost=9.0)
    pol = PILPolicy.optimize(spec)
    grid = [evaluate_exact(spec, PILPolicy(spec, t)).cost for t in np.arange(0.0, 14.0, 0.25)]
    assert pol.optimum.cost == pytest.approx(min(grid), rel=1e-9)


def test_myopic_fixed_cost_holds_back_small_orders():
    # With a large fixed order cost the one-period criterion orders nothing when a little stock
    # is missing, and orders when much is (the saving must beat K).
    spec = InstanceSpec("backorder", poisson(4.0), lead_time=0, fixed_order_cost=30.0)
    orders = MyopicPolicy(spec).act(np.array([[5], [-20]]))
    assert orders[0] == 0 and orders[1] > 0
