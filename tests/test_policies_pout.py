"""The proportional order-up-to policy (POUT; Disney et al. 2016): parameters, T = 1 is
base-stock, its order variance against the known ratio, and its search on simulated-only
instances (lead times that may cross)."""
from __future__ import annotations

import numpy as np
import pytest

from invbench import SpecError, load_spec
from invbench.baselines.policies.registry import make_policy
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs.vector_env import InventoryVectorEnv


def spec_with(**kw):
    return load_spec({"model": "backorder", "lead_time": 2, "shortage_cost": 9.0,
                      "demand": {"distribution": "poisson", "mean": 3.0}, **kw})


def test_t_one_is_base_stock():
    spec = spec_with(lead_time={"pmf": [0.2, 0.5, 0.3]})
    a = evaluate_exact(spec, make_policy(spec, "pout", {"S": 9, "T": 1.0}))
    b = evaluate_exact(spec, make_policy(spec, "base_stock", {"S": 9}))
    assert a.cost == pytest.approx(b.cost, rel=1e-12)


@pytest.mark.parametrize("params,field", [({"S": 5, "T": 0.5}, "param.T"), ({"S": -1, "T": 2}, "param.S"),
                                          ({"S": 5}, "param.T")])
def test_bad_parameters_name_the_field(params, field):
    with pytest.raises(SpecError) as e:
        make_policy(spec_with(), "pout", params)
    assert str(e.value).startswith(field)


@pytest.mark.parametrize("T", [2.0, 4.0])
def test_order_variance_ratio(T):
    # Bullwhip of the POUT with T_i = T_w = T under i.i.d. demand: Var(order) / Var(demand) =
    # 1 / (2T - 1) (Disney & Towill 2003, from memory; the error e_t = S - mu - position is AR(1)
    # with coefficient 1 - 1/T). Orders here are rounded to units, so a 5 % margin; Poisson(20)
    # keeps the order away from 0 and the lead times may cross, which the position ignores.
    spec = spec_with(max_order=200, demand={"distribution": "poisson", "mean": 20.0},
                     lead_time={"pmf": [0.2, 0.3, 0.5], "crossing": True})
    pol = make_policy(spec, "pout", {"S": 80, "T": T})
    env = InventoryVectorEnv(num_envs=200, model="backorder", spec=spec, episode_length=10_000)
    obs, _ = env.reset(seed=1)
    orders, demands = [], []
    for t in range(600):
        a = pol.act(obs)
        obs, _, _, _, info = env.step(a)  # action index = units (case pack 1)
        if t >= 100:
            orders.append(info["order_units"])
            demands.append(info["demand"])
    ratio = np.var(np.concatenate(orders)) / np.var(np.concatenate(demands))
    assert ratio == pytest.approx(1 / (2 * T - 1), rel=0.05), ratio


def test_search_on_crossing_lead_times_is_by_simulation():
    spec = spec_with(lead_time={"pmf": [0.3, 0.2, 0.5], "crossing": True})
    pol = make_policy(spec, "pout")
    assert pol.optimum.method == "simulation_search" and pol.T >= 1
    base = make_policy(spec, "base_stock")
    assert base.optimum.method == "simulation_search"
    # the search starts at the best base-stock level with T = 1 and keeps the cheaper point
    assert pol.optimum.cost <= base.optimum.cost + 1e-12
