"""The parameter search of a custom policy finds the same S as the built-in base_stock policy's
own optimisation (an independent reference: baselines/policies/base_stock.py, searched from the
newsvendor fractile, while the custom search starts from the middle of the declared range)."""
from __future__ import annotations

import numpy as np
import pytest

from invbench.baselines import custom
from invbench.baselines.policies.registry import make_policy
from invbench.envs.spec import spec_from_dict


class _OrderUpTo:
    def __init__(self, S: int, cap: int) -> None:
        self.S, self.cap = S, cap

    def act(self, obs):
        return np.clip(self.S - np.rint(obs).sum(axis=1), 0, self.cap).astype(np.int64)


def order_up_to(spec, params, seed, evaluation):
    return _OrderUpTo(int(params["S"]), spec.order_cap_units)


order_up_to.parameters = {"S": (0, 60)}


@pytest.mark.parametrize("lead_time,shortage,mean", [(1, 4.0, 3.0), (2, 9.0, 4.0), (3, 19.0, 5.0)])
def test_search_finds_the_base_stock_optimum(lead_time, shortage, mean):
    spec = spec_from_dict({"name": "x", "model": "lost_sales", "lead_time": lead_time,
                           "shortage_cost": shortage, "demand": {"distribution": "poisson", "mean": mean}})
    ref = make_policy(spec, "base_stock")
    pol, params = custom.optimise(order_up_to, "t:order_up_to", spec, 0, {})
    assert params == {"S": ref.S}
    assert pol.S == ref.S


def test_search_never_leaves_the_declared_range():
    spec = spec_from_dict({"name": "x", "model": "lost_sales", "lead_time": 2, "shortage_cost": 9.0,
                           "demand": {"distribution": "poisson", "mean": 4.0}})
    seen = []

    def capped(spec, params, seed, evaluation):
        seen.append(params["S"])
        return _OrderUpTo(int(params["S"]), spec.order_cap_units)

    capped.parameters = {"S": (3, 9)}  # the true optimum (15) lies above the range
    _, params = custom.optimise(capped, "t:capped", spec, 0, {})
    assert params == {"S": 9} and min(seen) >= 3 and max(seen) <= 9
