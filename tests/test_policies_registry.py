"""Registry and parameter checks: names, make_policy, and SpecErrors that name the parameter."""
import numpy as np
import pytest

from invbench.baselines.policies import POLICIES, make_policy, policy_descriptions, policy_names
from invbench.envs import InstanceSpec, SpecError, poisson

LS = InstanceSpec("lost_sales", poisson(4.0), lead_time=1, case_pack=2, max_order=20)


def test_names_and_descriptions():
    assert policy_names() == ["base_stock", "s_S", "constant_order", "capped_base_stock", "pil", "myopic",
                              "bsp_low_ew", "single_regular", "single_expedited", "dual_index", "capped_dual_index",
                              "tailored_base_surge", "echelon_base_stock", "shang_song", "installation_base_stock", "pout"]
    desc = policy_descriptions()
    assert set(desc) == set(policy_names()) and all(desc[n] and "\n" not in desc[n] for n in desc)
    assert all(POLICIES[n].name == n for n in policy_names())


@pytest.mark.parametrize("name", ["base_stock", "s_S", "constant_order", "capped_base_stock", "pil", "myopic"])
def test_make_policy_optimises_when_no_params(name):
    spec = InstanceSpec("lost_sales", poisson(2.0), lead_time=1)
    pol = make_policy(spec, name, None)
    assert pol.name == name
    assert pol.act(np.zeros((2, 1))).shape == (2,)
    again = make_policy(spec, name, pol.params())  # round trip through from_params
    assert again.params() == pol.params()


@pytest.mark.parametrize("name,params,message", [
    ("base_stock", {"S": -3}, "param.S: must be an integer >= 0, got -3"),
    ("base_stock", {"S": 2.5}, "param.S: must be an integer >= 0, got 2.5"),
    ("base_stock", {"S": True}, "param.S: must be an integer >= 0, got True"),
    ("base_stock", {"S": 5, "r": 2}, "param.r: unknown parameter for base_stock (allowed: S)"),
    ("s_S", {"s": 8, "S": 8}, "param.s: must be an integer < S (8), got 8"),
    ("s_S", {"S": 8}, "param.s: required for s_S"),
    ("constant_order", {"r": 3}, "param.r: must be a multiple of the case pack (2 units), got 3"),
    ("constant_order", {"r": 22}, "param.r: must be an integer in [0, 20], got 22"),
    ("capped_base_stock", {"S": 10}, "param.r: required for capped_base_stock"),
    ("pil", {"target": -1.0}, "param.target: must be a number >= 0, got -1"),
    ("pil", {"target": "high"}, "param.target: must be a number >= 0, got 'high'"),
    ("myopic", {"S": 3}, "param.S: unknown parameter for myopic (allowed: none)"),
])
def test_bad_params_name_the_parameter(name, params, message):
    with pytest.raises(SpecError) as err:
        make_policy(LS, name, params)
    assert str(err.value) == message


def test_unknown_policy_name():
    with pytest.raises(SpecError, match=r"^policy: must be one of base_stock, .*got 'bogus'"):
        make_policy(LS, "bogus")
