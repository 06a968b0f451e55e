"""Capped base-stock against its two limits on lost sales, Xin (2021), Operations Research."""
import pytest

from invbench.baselines.policies import BaseStockPolicy, CappedBaseStockPolicy, ConstantOrderPolicy
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs import Demand, InstanceSpec, poisson

CASES = [
    ("poisson-L2-p4", poisson(5.0), 2, 4.0),
    ("geometric-L2-p4", Demand.from_dict({"distribution": "geometric", "mean": 3.0}), 2, 4.0),
    ("poisson-L1-p1", poisson(5.0), 1, 1.0),
]


@pytest.mark.parametrize("label,demand,L,p", CASES, ids=[c[0] for c in CASES])
def test_best_capped_beats_both_limits(label, demand, L, p):
    # Xin (2021): capped base-stock contains base-stock (r -> infinity) and constant order
    # (S -> infinity), so its best cost is at most either (common practice: both limits).
    spec = InstanceSpec("lost_sales", demand, lead_time=L, holding_cost=1.0, shortage_cost=p)
    capped = CappedBaseStockPolicy.optimize(spec)
    base = BaseStockPolicy.optimize(spec)
    const = ConstantOrderPolicy.optimize(spec)
    c_capped = evaluate_exact(spec, capped).cost  # scored afresh, not taken from the search
    assert c_capped == pytest.approx(capped.optimum.cost, rel=1e-8)
    assert c_capped <= evaluate_exact(spec, base).cost + 1e-9
    assert c_capped <= const.optimum.cost + 1e-9
