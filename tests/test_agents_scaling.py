"""The agents' automatic order bound and position cap must not cut off the optimal policy.

Reference: the exact solver's certified optimal policy (value iteration on the full chain), and
Scarf (1960) / Zheng & Federgruen (1991) for why a fixed order cost makes orders come in
batches far above one period's demand.
"""
from __future__ import annotations

import numpy as np
import pytest

import invbench
from invbench.agents.scaling import batch_policy, demand_quantile, scaling_for
from invbench.agents.settings import CommonSettings
from invbench.envs.spec import spec_from_dict
from invbench.experiments.simulate import simulate


def _optimal_orders(spec) -> tuple[np.ndarray, np.ndarray]:
    """Orders and positions after ordering of the optimal policy along simulated paths."""
    opt = invbench.solve(spec)
    seen: list[tuple[np.ndarray, np.ndarray]] = []

    def act(states: np.ndarray) -> np.ndarray:
        o = np.asarray(opt.policy.act(states), dtype=np.int64)
        seen.append((o, states.sum(axis=1) + o))
        return o

    simulate(spec, act, replications=8, periods=2000, warmup=100, seed=3)
    return np.concatenate([o for o, _ in seen]), np.concatenate([p for _, p in seen])


@pytest.mark.parametrize("model", ["lost_sales", "backorder"])
def test_bounds_cover_the_optimal_batches_with_a_fixed_cost(model: str) -> None:
    spec = spec_from_dict({"model": model, "lead_time": 1, "holding_cost": 1.0, "shortage_cost": 9.0,
                           "fixed_order_cost": 40.0, "demand": {"distribution": "poisson", "mean": 4.0}})
    orders, positions = _optimal_orders(spec)
    sc = scaling_for(spec, CommonSettings())
    # the optimum orders batches above one period's 0.9999 demand quantile (the old bound) ...
    assert orders.max() > demand_quantile(spec, 0.9999)
    # ... and the automatic bound and cap still cover every order and position it takes
    assert orders.max() <= sc.max_order_units
    assert positions.max() <= sc.position_cap
    s, S = batch_policy(spec)
    assert S - s > 1


def test_no_fixed_cost_keeps_the_quantile_bound() -> None:
    spec = spec_from_dict({"model": "lost_sales", "lead_time": 2, "shortage_cost": 9.0,
                           "demand": {"distribution": "poisson", "mean": 5.0}})
    assert batch_policy(spec) is None
    sc = scaling_for(spec, CommonSettings())
    assert sc.max_order_units == demand_quantile(spec, 0.9999)
    orders, positions = _optimal_orders(spec)
    assert orders.max() <= sc.max_order_units and positions.max() <= sc.position_cap
