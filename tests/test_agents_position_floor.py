"""DQN's position floor under backorders must not cut off the optimal policy.

References: Scarf (1960) — (s, S) is optimal for backorders with a fixed order cost, so the
position after ordering never falls below s + 1 — and the base-stock optimum without one
(common practice); checked against the exact solver's certified optimum: the optimal policy
with the floor laid over it costs exactly the optimum, while a floor a few units higher does
not. Floors apply only where unmet demand is backordered (lost sales keep the position >= 0).
"""
from __future__ import annotations

import dataclasses

import numpy as np
import pytest
import torch

import invbench
from invbench.envs.models import MODELS
from invbench.agents.learned_policy import LearnedPolicy
from invbench.agents.network import PolicyNet, architecture
from invbench.agents.scaling import Scaling, batch_policy, position_floor_for, scaling_for
from invbench.agents.settings import sb3_settings
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs.errors import SpecError
from invbench.envs.spec import spec_from_dict

BASE = {"model": "backorder", "holding_cost": 1.0, "shortage_cost": 9.0}
CASES = {
    "fixed cost, Poisson": {**BASE, "lead_time": 1, "fixed_order_cost": 40.0,
                            "demand": {"distribution": "poisson", "mean": 4.0}},
    "fixed cost, negative binomial": {**BASE, "lead_time": 1, "fixed_order_cost": 40.0,
                                      "demand": {"distribution": "negative_binomial", "mean": 6.0, "variance": 18.0}},
    "fixed cost, case pack": {**BASE, "lead_time": 1, "fixed_order_cost": 20.0, "case_pack": 3,
                              "demand": {"distribution": "poisson", "mean": 4.0}},
    "no fixed cost, L = 2": {**BASE, "lead_time": 2, "shortage_cost": 19.0,
                             "demand": {"distribution": "poisson", "mean": 5.0}},
    "random lead time": {**BASE, "lead_time": {"pmf": [0.0, 0.5, 0.3, 0.2]},
                         "demand": {"distribution": "poisson", "mean": 3.0}},
}


class _Floored:
    """A policy with the floor's rule laid over it (as Scaling.orders applies it)."""

    def __init__(self, policy, floor: int, pack: int) -> None:
        self.policy, self.floor, self.pack = policy, floor, pack

    def act(self, states: np.ndarray) -> np.ndarray:
        o = np.asarray(self.policy.act(states), dtype=np.int64)
        need = self.floor - states.sum(axis=1)
        return np.maximum(o, -(-need // self.pack) * self.pack)


@pytest.mark.parametrize("case", list(CASES))
def test_the_floor_never_binds_on_the_optimal_policy(case: str) -> None:
    spec = spec_from_dict(CASES[case])
    floor = position_floor_for(spec)
    assert floor is not None
    opt = invbench.solve(spec)
    ev = evaluate_exact(spec, _Floored(opt.policy, floor, spec.case_pack))
    assert ev.cost == pytest.approx(opt.cost, rel=1e-6)


def test_a_floor_above_s_plus_one_costs_more() -> None:
    """The check above can fail: a floor 3 units above the optimal s + 1 forces extra orders."""
    spec = spec_from_dict(CASES["fixed cost, Poisson"])
    s, _ = batch_policy(spec)
    opt = invbench.solve(spec)
    ev = evaluate_exact(spec, _Floored(opt.policy, s + 4, 1))
    assert ev.cost > opt.cost * 1.001


def test_no_floor_under_lost_sales_or_with_several_orders() -> None:
    ls = spec_from_dict({**CASES["fixed cost, Poisson"], "model": "lost_sales"})
    assert position_floor_for(ls) is None
    serial = spec_from_dict({**MODELS["serial"].example, "model": "serial"})
    assert position_floor_for(serial) is None


def test_dqn_gets_the_floor_by_default_and_the_others_do_not_use_it() -> None:
    spec = spec_from_dict(CASES["fixed cost, Poisson"])
    assert scaling_for(spec, sb3_settings("dqn")).position_floor == position_floor_for(spec)
    assert scaling_for(spec, sb3_settings("dqn", {"position_floor": "false"})).position_floor is None
    assert scaling_for(spec, sb3_settings("ppo")).position_floor is None
    with pytest.raises(SpecError, match=r"agent\.position_floor: not used by agent 'ppo'"):
        sb3_settings("ppo", {"position_floor": "true"})


def _scaling(floor: int | None, pack: int = 1) -> Scaling:
    return Scaling(obs_scale=4.0, obs_shift=1.0, reward_offset=10.0, reward_scale=10.0, case_pack=pack,
                   max_order_units=12 * pack, obs_clip=10.0, position_cap=30, position_floor=floor)


def test_orders_lift_the_position_to_the_floor_in_whole_packs_within_the_largest_order() -> None:
    states = np.array([[-7, 0], [2, 1], [10, 5], [-100, 0]])
    index = np.array([0, 1, 0, 0])
    np.testing.assert_array_equal(_scaling(None).orders(states, index), [0, 1, 0, 0])
    np.testing.assert_array_equal(_scaling(5).orders(states, index), [12, 2, 0, 12])
    # packs of 3: 12 units lift -7 to 5, 3 lift 3 to 6; the largest order is 36
    np.testing.assert_array_equal(_scaling(5, pack=3).orders(states, index), [12, 3, 0, 36])


def test_policy_file_round_trip_and_files_from_before_the_floor() -> None:
    sc = _scaling(-2)
    assert Scaling.from_dict(sc.to_dict()) == sc
    old = sc.to_dict()
    del old["position_floor"]
    assert Scaling.from_dict(old).position_floor is None
    for bad in ("3", 2.5, True, 30, 31):
        with pytest.raises(SpecError, match=r"position_floor"):
            Scaling.from_dict({**sc.to_dict(), "position_floor": bad})


def test_a_learned_policy_never_leaves_the_position_below_its_floor() -> None:
    spec = spec_from_dict(CASES["fixed cost, negative binomial"])
    sc = scaling_for(spec, sb3_settings("dqn"))
    arch = architecture(spec.state_dim, (8,), sc.n_outputs, "relu", "q_values")
    net = PolicyNet(arch)
    with torch.no_grad():  # a network that always picks action 0 (order nothing), as DQN's seed 1 did
        for p in net.parameters():
            p.zero_()
        net.linears[-1].bias[0] = 1.0
    states = np.arange(-40, 60).reshape(-1, 1)
    floor = sc.position_floor
    free = LearnedPolicy(spec, dataclasses.replace(sc, position_floor=None), net)
    assert (states.sum(axis=1) + free.act(states)).min() < floor
    pol = LearnedPolicy(spec, dataclasses.replace(sc, position_floor=floor), net)
    assert (states.sum(axis=1) + pol.act(states)).min() >= floor
