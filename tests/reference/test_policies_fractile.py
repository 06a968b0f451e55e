"""Newsvendor/critical-fractile levels of the classical policies against scipy.stats."""
import numpy as np
import pytest
from scipy import stats

from invbench.baselines.policies import BaseStockPolicy, MyopicPolicy
from invbench.baselines.policies.base_stock import fractile_level
from invbench.baselines.policies.pil import projected_level
from invbench.envs import Demand, InstanceSpec, poisson


@pytest.mark.parametrize("mean,L,h,p", [(5.0, 0, 1.0, 9.0), (5.0, 2, 1.0, 9.0), (3.5, 1, 2.0, 3.0),
                                        (12.0, 3, 1.0, 19.0), (1.2, 0, 1.0, 1.0)])
def test_backorder_base_stock_is_critical_fractile_of_poisson(mean, L, h, p):
    # Source: scipy.stats.poisson.ppf; demand over L + 1 periods is Poisson((L + 1) mean);
    # level = F^-1(p / (p + h)) is the newsvendor critical fractile (handbook result).
    spec = InstanceSpec("backorder", poisson(mean), lead_time=L, holding_cost=h, shortage_cost=p)
    expected = int(stats.poisson.ppf(p / (p + h), (L + 1) * mean))
    assert fractile_level(spec) == expected
    assert BaseStockPolicy.optimize(spec).S == expected


@pytest.mark.parametrize("L", [0, 1, 2])
def test_fractile_of_negative_binomial_lead_time_demand(L):
    # Source: scipy.stats.nbinom.ppf; a sum of L + 1 iid NB(n, q) is NB((L + 1) n, q).
    m, v = 4.0, 10.0
    n, q = m * m / (v - m), m / v
    spec = InstanceSpec("backorder", Demand.from_dict({"distribution": "negative_binomial", "mean": m,
                                                       "variance": v}), lead_time=L, holding_cost=1.0,
                        shortage_cost=4.0)
    assert fractile_level(spec) == int(stats.nbinom.ppf(0.8, (L + 1) * n, q))


@pytest.mark.parametrize("model,L", [("backorder", 0), ("backorder", 2), ("lost_sales", 0)])
def test_myopic_without_order_costs_is_newsvendor(model, L):
    # Source: scipy.stats.poisson.ppf. With no ordering cost, the cost of the period an order
    # arrives in is the newsvendor cost of the position after ordering (backorders) or of the
    # on-hand after ordering (lost sales, L = 0): order up to F^-1(p / (p + h)) over L + 1 periods.
    spec = InstanceSpec(model, poisson(4.0), lead_time=L, holding_cost=1.0, shortage_cost=6.0)
    level = int(stats.poisson.ppf(6.0 / 7.0, (L + 1) * 4.0))
    n = spec.state_dim
    states = np.zeros((4, n), dtype=np.int64)
    states[:, 0] = [0, 1, 3, 5] if model == "lost_sales" else [-4, 0, 2, 5]
    orders = MyopicPolicy(spec).act(states)
    assert np.array_equal(states.sum(axis=1) + orders, np.full(4, level))


@pytest.mark.parametrize("x0", [0, 1, 3, 6, 12])
def test_pil_projection_one_period_is_expected_leftover(x0):
    # Source: scipy.stats.poisson.cdf with the handbook identity E[(x - D)^+] = sum_{k<x} F(k):
    # under lost sales with L = 1 the stock when a new order arrives is the leftover (x0 - D)^+.
    spec = InstanceSpec("lost_sales", poisson(3.0), lead_time=1)
    expected = float(stats.poisson.cdf(np.arange(x0), 3.0).sum())
    assert projected_level(spec, np.array([[x0]]))[0] == pytest.approx(expected, abs=1e-8)
