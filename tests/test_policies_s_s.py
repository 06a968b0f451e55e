"""(s, S): lost-sales and case-pack searches against exhaustive exact evaluation; act."""
import numpy as np
import pytest

from invbench.baselines.policies import SSPolicy
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs import InstanceSpec, poisson


@pytest.mark.parametrize("model,L,q", [("lost_sales", 1, 1), ("backorder", 1, 3)])
def test_search_matches_exhaustive(model, L, q):
    spec = InstanceSpec(model, poisson(3.0), lead_time=L, holding_cost=1.0, shortage_cost=5.0,
                        fixed_order_cost=10.0, case_pack=q, max_order=45)
    pol = SSPolicy.optimize(spec)
    assert pol.optimum.method == "exact_search"
    lo_s = -1 if model == "lost_sales" else -4
    grid = {(s, S): evaluate_exact(spec, SSPolicy(spec, s, S)).cost
            for S in range(3, 19) for s in range(lo_s, S)}
    assert pol.optimum.cost == pytest.approx(min(grid.values()), rel=1e-9)


def test_act_orders_only_at_or_below_s():
    spec = InstanceSpec("backorder", poisson(3.0), lead_time=2, case_pack=2)
    pol = SSPolicy(spec, s=4, S=11)
    obs = np.array([[5, 0], [4, 0], [0, 1], [-3, 0]])
    # IP 5 -> 0; 4 -> 7 -> 6 (packs of 2); 1 -> 10; -3 -> 14.
    assert pol.act(obs).tolist() == [0, 6, 10, 14]
