"""Solver cross-checks against outside references: Zheng & Federgruen (1991), scipy's HiGHS LP,
the critical-fractile formula with scipy.stats, and Janakiraman, Seshadri & Shanthikumar (2007)."""
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import stats

from invbench import solve
from invbench.baselines.summary import policy_structure
from tests.conftest import backorder, lost_sales


def test_zheng_federgruen_1991_worked_example():
    # Zheng & Federgruen (1991), Operations Research 39(4), worked example (from memory):
    # Poisson mean 10, K = 64, h = 1, p = 9, L = 0 -> s = 6, S = 40, average cost 35.02.
    spec = backorder(0, 9.0, mean=10.0, fixed_order_cost=64.0, max_order=200)
    res = solve(spec)
    assert abs(res.cost - 35.02) <= 0.005
    info = policy_structure(res)
    assert info["kind"] == "s_S" and info["s"] == 6 and info["S"] == 40


@pytest.mark.parametrize("spec", [
    lost_sales(1, 4.0, mean=2.0), lost_sales(2, 9.0, mean=1.5), lost_sales(0, 9.0, mean=3.0, fixed_order_cost=5.0),
    backorder(0, 4.0, mean=2.0), backorder(1, 9.0, mean=2.0, fixed_order_cost=8.0),
    backorder(1, 9.0, mean=2.0, case_pack=3),
], ids=["ls-L1", "ls-L2", "ls-K", "bo-L0", "bo-K", "bo-pack"])
def test_rvi_equals_highs_lp(spec):
    # Reference: the average-cost LP (Puterman 1994, sec. 8.8) solved by scipy.optimize.linprog(HiGHS).
    rvi = solve(spec)
    lp = solve(spec, method="lp", bounds=rvi.bounds)
    assert abs(rvi.cost - lp.cost) <= 1e-6 * max(1.0, lp.cost)


@pytest.mark.parametrize("L,p,mean", [(0, 9.0, 5.0), (1, 4.0, 5.0), (2, 19.0, 3.0), (3, 9.0, 2.0)])
def test_base_stock_is_optimal_for_backorders_and_level_is_critical_fractile(L, p, mean):
    # Critical fractile: S = smallest y with P(D_{L+1} <= y) >= p / (p + h), D_{L+1} ~ Poisson((L+1) mean)
    # (scipy.stats.poisson.ppf); base-stock is optimal without fixed cost (common practice; Zipkin 2000, ch. 9).
    res = solve(backorder(L, p, mean=mean))
    info = policy_structure(res)
    assert info["kind"] == "base_stock"
    fractile = p / (p + 1.0)
    S_scipy = int(stats.poisson.ppf(fractile, (L + 1) * mean))
    assert info["S"] == S_scipy
    # its cost: E[h (S - D)^+ + p (D - S)^+] with D ~ Poisson((L+1) mean), computed with scipy.stats
    d = np.arange(0, 200)
    pmf = stats.poisson.pmf(d, (L + 1) * mean)
    formula = float(np.sum(pmf * (np.maximum(S_scipy - d, 0) + p * np.maximum(d - S_scipy, 0))))
    assert abs(res.cost - formula) <= 1e-5 * formula


def test_backorder_position_reduction_equals_full_pipeline_state():
    # The inventory-position reduction of the backorder model (common practice; Zipkin 2000, ch. 9)
    # must give the same optimum as the full pipeline state.
    for L in (1, 2):
        spec = backorder(L, 9.0, mean=2.0, fixed_order_cost=6.0, max_order=20)
        a = solve(spec)
        b = solve(spec, full_pipeline=True)
        assert b.representation == "backorder_full"
        assert abs(a.cost - b.cost) <= 1e-5 * a.cost


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(L=st.integers(0, 2), p=st.floats(0.5, 30.0), h=st.floats(0.2, 3.0), mean=st.floats(0.5, 4.0))
def test_lost_sales_never_costs_more_than_backorders(L, p, h, mean):
    # Janakiraman, Seshadri & Shanthikumar (2007), Management Science 53(2): at the same per-unit
    # penalty, the optimal lost-sales cost is at most the optimal backorder cost.
    ls = solve(lost_sales(L, p, mean=mean, holding_cost=h))
    bo = solve(backorder(L, p, mean=mean, holding_cost=h))
    assert ls.upper <= bo.upper * (1 + 1e-6) + 1e-9


def test_discounted_value_iteration_equals_policy_iteration():
    # Value iteration and Howard's policy iteration must agree (Puterman 1994, ch. 6).
    spec = backorder(1, 9.0, mean=3.0, fixed_order_cost=10.0, discount=0.9)
    vi = solve(spec)
    pi = solve(spec, method="policy_iteration", bounds=vi.bounds)
    assert vi.criterion == "discounted"
    assert abs(vi.cost - pi.cost) <= 1e-5 * pi.cost


@pytest.mark.parametrize("spec", [lost_sales(2, 9.0), backorder(1, 9.0, mean=4.0, fixed_order_cost=20.0)],
                         ids=["lost-sales", "backorder-K"])
def test_bounds_that_bind_are_widened_until_the_optimum_is_inside(spec):
    # Start from bounds far too tight: the a-posteriori check must widen them and reach the
    # same certified optimum (Zipkin 2008 value for the lost-sales case, from memory: 6.09).
    from invbench.envs.models.exact_space import Bounds
    normal = solve(spec)
    b0 = spec.model_def.exact_space(spec).initial_bounds()
    tight = Bounds(upper=max(b0.upper // 3, 2), lower=min(-1, b0.lower // 3))
    res = solve(spec, bounds=tight)
    assert res.widenings >= 1
    assert abs(res.cost - normal.cost) <= 1e-6 * normal.cost
    if spec.model == "lost_sales":
        assert abs(res.cost - 6.09) <= 0.005
