"""The dual-sourcing policies: their orders on hand-worked states, parameter refusals, which
models they serve, and that each optimised policy's recorded cost is its exact evaluation.

Outside references: the policy definitions as published (Veeraraghavan & Scheller-Wolf 2008;
Sun & Van Mieghem 2019; Allon & Van Mieghem 2010), worked by hand on the states below.
"""
from __future__ import annotations

import numpy as np
import pytest

from invbench.baselines.policies.registry import make_policy, policies_for
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs.errors import SpecError
from tests.conftest import lost_sales
from tests.test_dual_sourcing import dual

NAMES = ["single_regular", "single_expedited", "dual_index", "capped_dual_index", "tailored_base_surge"]


def test_dual_sourcing_has_exactly_its_own_policies():
    assert policies_for("dual_sourcing") == NAMES
    with pytest.raises(SpecError, match=r"^policy: base_stock is not defined for the dual_sourcing model"):
        make_policy(dual(), "base_stock", {"S": 5})
    with pytest.raises(SpecError, match=r"^policy: dual_index is not defined for the lost_sales model"):
        make_policy(lost_sales(1, 9.0), "dual_index", {"S_e": 1, "S_r": 5})


def test_orders_on_hand_worked_states():
    # lr = 3, le = 1: state [net, regular due in 1, regular due in 2]. Expedited position =
    # net + regular due in 1 (arrives with an expedited order placed now); regular position =
    # everything.
    spec = dual(3, 1)
    s = np.array([[1, 2, 3], [-4, 0, 1]], dtype=float)  # positions (3, 6) and (-4, -3)
    di = make_policy(spec, "dual_index", {"S_e": 5, "S_r": 9})
    # row 0: expedite 5 - 3 = 2; regular 9 - 6 - 2 = 1. row 1: expedite 9 -> capped at 8;
    # regular 9 - (-3) - 8 = 4
    assert di.act(s).tolist() == [[1, 2], [4, 8]]
    cdi = make_policy(spec, "capped_dual_index", {"S_e": 5, "S_r": 9, "r": 2})
    # regular min((9 - 6)^+, 2) = 2 and min((9 + 3)^+, 2) = 2, ignoring this period's expedited order
    assert cdi.act(s).tolist() == [[2, 2], [2, 8]]
    tbs = make_policy(spec, "tailored_base_surge", {"r": 1, "S_e": 4})
    assert tbs.act(s).tolist() == [[1, 1], [1, 8]]
    assert make_policy(spec, "single_regular", {"S": 8}).act(s).tolist() == [[2, 0], [8, 0]]
    assert make_policy(spec, "single_expedited", {"S": 8}).act(s).tolist() == [[0, 2], [0, 8]]


@pytest.mark.parametrize("name,params,message", [
    ("dual_index", {"S_e": 6, "S_r": 5}, "param.S_r: must be an integer >= S_e (6), got 5"),
    ("dual_index", {"S_e": 6}, "param.S_r: required for dual_index"),
    ("capped_dual_index", {"S_e": 1, "S_r": 5, "r": 9}, "param.r: must be an integer in [0, 8], got 9"),
    ("tailored_base_surge", {"r": 1, "S_e": 2.5}, "param.S_e: must be an integer, got 2.5"),
    ("single_regular", {"S": 5, "r": 1}, "param.r: unknown parameter for single_regular (allowed: S)"),
])
def test_bad_params_name_the_parameter(name, params, message):
    with pytest.raises(SpecError) as err:
        make_policy(dual(), name, params)
    assert str(err.value) == message


@pytest.mark.parametrize("name", NAMES)
def test_optimised_cost_is_the_exact_evaluation_of_the_returned_policy(name):
    spec = dual(2, 0, ce=10.0)
    pol = make_policy(spec, name)
    again = make_policy(spec, name, pol.params())  # round trip through from_params
    assert again.params() == pol.params()
    assert evaluate_exact(spec, again).cost == pytest.approx(pol.optimum.cost, rel=1e-8)


def test_capped_dual_index_contains_its_limits():
    # Sun & Van Mieghem (2019): the capped dual index contains the dual index with the
    # expedited order not counted in the regular position (large cap) and tailored base-surge's
    # smoothing (small cap); its best cost is at most that of its r = largest-demand member.
    spec = dual(3, 0, ce=10.0)
    cdi = make_policy(spec, "capped_dual_index")
    uncapped = make_policy(spec, "capped_dual_index", {"S_e": cdi.S_e, "S_r": cdi.S_r, "r": 8})
    assert cdi.optimum.cost <= evaluate_exact(spec, uncapped).cost + 1e-9
    tbs = make_policy(spec, "tailored_base_surge")
    assert tbs.r < 2  # below mean demand 2: the only stable constant orders
