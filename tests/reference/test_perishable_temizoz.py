"""Perishable goods against published values: the certified optimum and the best base-stock
policy of the shelf-life-3 instance of Temizöz et al. (deep controlled learning for inventory
control): Poisson(4) demand, shelf life 3, lead time 0, shortage 100, outdating 100, holding 0,
no ordering cost, orders up to 14, FIFO and LIFO issuing.

The values are those stated as published in our task brief (Temizöz et al., perishable
inventory table); we did not re-read the paper here. They are given to three decimals.
"""
import pytest

from invbench import load_spec, solve
from invbench.baselines.policies import BaseStockPolicy
from invbench.baselines.policies.bsp_low_ew import BSPLowEWPolicy


def _instance(issuing: str):
    return load_spec({"model": "perishable", "shelf_life": 3, "lead_time": 0, "issuing": issuing,
                      "holding_cost": 0.0, "shortage_cost": 100.0, "outdating_cost": 100.0,
                      "max_order": 14, "demand": {"distribution": "poisson", "mean": 4.0}})


# Temizöz et al., perishable table, m = 3, L = 0: optimal cost 13.210 (FIFO), 50.248 (LIFO).
@pytest.mark.parametrize("issuing,published", [("fifo", 13.210), ("lifo", 50.248)])
def test_certified_optimum_matches_published(issuing, published):
    res = solve(_instance(issuing))
    assert res.lower <= res.upper
    assert res.cost == pytest.approx(published, abs=5e-4 + 1e-6)


# Temizöz et al., perishable table, m = 3, L = 0: best base-stock 13.792 (FIFO), 60.859 (LIFO).
@pytest.mark.parametrize("issuing,published", [("fifo", 13.792), ("lifo", 60.859)])
def test_best_base_stock_matches_published(issuing, published):
    pol = BaseStockPolicy.optimize(_instance(issuing))
    assert pol.optimum.cost == pytest.approx(published, abs=5e-4 + 1e-6)


# Haijema & Minner (2019), abstract: BSP-low-EW performs close to the optimum and beats the
# other stock-age dependent rules. Here it must lie between the published optimum and the
# published best base-stock cost (it nests base-stock at L = 0, so it cannot be worse).
@pytest.mark.parametrize("issuing,optimum,base", [("fifo", 13.210, 13.792), ("lifo", 50.248, 60.859)])
def test_bsp_low_ew_between_published_optimum_and_base_stock(issuing, optimum, base):
    pol = BSPLowEWPolicy.optimize(_instance(issuing))
    assert optimum - 5e-4 <= pol.optimum.cost <= base + 5e-4
