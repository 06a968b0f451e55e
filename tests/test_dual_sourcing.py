"""The dual-sourcing model: its step rules on worked examples, refusals, the exact space
(merged pipelines, size estimate, widening, budget refusal) and the env's two-order actions.

Outside references: hand-worked periods of the timing stated in the issue and README (common
practice: backorders filled from later deliveries), and the Gymnasium action space contract.
The other checks compare the project's parts with one another.
"""
from __future__ import annotations

import gymnasium as gym
import numpy as np
import pytest

import invbench  # noqa: F401  (registers the env ids)
from invbench.baselines.exact import solve
from invbench.baselines.mdp import build_mdp
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs.errors import BudgetError, SpecError
from invbench.envs.models.exact_space import Bounds
from invbench.envs.spec import InstanceSpec, spec_from_dict


def dual(lr: int = 2, le: int = 0, ce: float = 5.0, **kw) -> InstanceSpec:
    d = {"model": "dual_sourcing", "lead_time": lr, "expedited_lead_time": le, "holding_cost": 5.0,
         "shortage_cost": 495.0, "unit_order_cost": 0.0, "expedited_unit_cost": ce, "max_order": 8,
         "demand": {"distribution": "uniform", "low": 0, "high": 4}}
    d.update(kw)
    return spec_from_dict(d)


def test_one_period_worked_by_hand_expedited_lead_time_zero():
    # lr = 2, le = 0: state [net 3, regular due next period 2]; order 4 regular, 1 expedited;
    # demand 5. The expedited unit arrives at once: 4 on hand for demand 5 -> 1 backordered;
    # next period the 2 regular units arrive: net -1 + 2 = 1; the 4 regular units are now due
    # in one period.
    spec = dual(2, 0, ce=5.0, unit_order_cost=1.5)
    nxt, out = spec.model_def.step(spec, np.array([[3, 2]]), np.array([[4, 1]]), np.array([5]))
    assert nxt.tolist() == [[1, 4]]
    assert out.flows["sales"].tolist() == [4] and out.flows["backordered"].tolist() == [1]
    assert out.costs["shortage"].tolist() == [495.0] and out.costs["holding"].tolist() == [0.0]
    assert out.costs["regular_ordering"].tolist() == [6.0] and out.costs["expedited_ordering"].tolist() == [5.0]


def test_one_period_worked_by_hand_with_both_pipelines():
    # lr = 3, le = 2: state [net 2, regular due in 1: 1, regular due in 2: 3, expedited due in
    # 1: 4]; order 2 regular, 5 expedited; demand 1 -> end net 1, holding 5; next period the
    # regular 1 and the expedited 4 arrive (net 6); regular 3 is due in 1, the new regular 2 in
    # 2, the new expedited 5 in 1.
    spec = dual(3, 2)
    nxt, out = spec.model_def.step(spec, np.array([[2, 1, 3, 4]]), np.array([[2, 5]]), np.array([1]))
    assert nxt.tolist() == [[6, 3, 2, 5]]
    assert out.costs["holding"].tolist() == [5.0] and out.flows["received"].tolist() == [5]


def test_expedited_lead_time_one_arrives_next_period():
    spec = dual(2, 1)
    assert spec.state_dim == 2  # [net, regular due in 1]; no expedited slot with le = 1
    nxt, _ = spec.model_def.step(spec, np.array([[0, 0]]), np.array([[3, 2]]), np.array([0]))
    assert nxt.tolist() == [[2, 3]]


@pytest.mark.parametrize("changes,message", [
    ({"lead_time": 1, "expedited_lead_time": 1},
     "instance.lead_time: must be > expedited_lead_time (1) for the dual_sourcing model"),
    ({"fixed_order_cost": 10.0}, "instance.fixed_order_cost: unknown key for the dual_sourcing model"),
    ({"case_pack": 2}, "instance.case_pack: unknown key for the dual_sourcing model"),
    ({"expedited_unit_cost": -1.0}, "instance.expedited_unit_cost: must be a number in [0, 1e+12], got -1"),
    ({"expedited_lead_time": 2.5}, "instance.expedited_lead_time: must be an integer in [0, 49], got 2.5"),
])
def test_bad_instances_are_refused_with_one_line(changes, message):
    with pytest.raises(SpecError) as err:
        dual(**changes)
    assert str(err.value).startswith(message) and "\n" not in str(err.value)


def test_fixed_cost_refused_on_the_spec_object_too():
    from invbench.envs.demand import Demand
    with pytest.raises(SpecError, match=r"^instance.fixed_order_cost: not used by the dual_sourcing model"):
        InstanceSpec("dual_sourcing", Demand.from_dict({"distribution": "poisson", "mean": 2}), lead_time=2,
                     fixed_order_cost=3.0)


def test_env_has_one_action_per_supplier():
    env = gym.make("invbench/DualSourcing-v0", spec=dual(3, 0))
    assert isinstance(env.action_space, gym.spaces.MultiDiscrete) and env.action_space.nvec.tolist() == [9, 9]
    obs, _ = env.reset(seed=1)
    assert obs.tolist() == [0.0, 0.0, 0.0]
    obs, r, _, _, info = env.step(np.array([3, 2]))
    assert info["order_units"] == [3, 2]
    assert obs[2] == 3 and obs[0] == 2 - info["demand"]  # regular due in 2, expedited at once
    assert r == -info["cost"]
    with pytest.raises(SpecError, match=r"^action: must be integers in \[0, 8\], \[0, 8\]"):
        env.step(np.array([9, 0]))


@pytest.mark.parametrize("lr,le", [(2, 0), (3, 1), (4, 2)])
def test_size_estimate_counts_exactly(lr, le):
    spec = dual(lr, le, max_order=5)
    space = spec.model_def.exact_space(spec)
    b = Bounds(upper=9, lower=-3)
    est = space.estimate(b)
    mdp = build_mdp(space, b)
    assert est.states == mdp.n_states and est.pairs == mdp.n_pairs


def test_merged_pipelines_give_the_cost_of_the_full_model():
    # The solver merges units due in the same period from either supplier; its optimal table,
    # evaluated exactly on the full per-supplier state, must cost what the solver certified.
    spec = dual(3, 2, ce=10.0, max_order=5, demand={"distribution": "uniform", "low": 0, "high": 3})
    opt = solve(spec)
    assert opt.representation == "dual_sourcing_merged" and opt.converged
    ev = evaluate_exact(spec, opt.policy)
    assert ev.states > 0 and abs(ev.cost - opt.cost) <= 1e-6 * opt.cost


def test_tight_bounds_are_widened_to_the_same_optimum():
    # with expediting dearer than a period of backorder the optimum lets backorders wait, so
    # both the upper bound (position) and the lower bound (net inventory) bind at first
    spec = dual(2, 0, ce=20.0, shortage_cost=10.0)
    ref = solve(spec)
    tight = solve(spec, bounds=Bounds(upper=4, lower=0))
    assert tight.widenings >= 1 and tight.bounds.upper > 4 and tight.bounds.lower < 0
    assert abs(tight.cost - ref.cost) <= 1e-5 * ref.cost


def test_over_budget_is_refused_with_the_estimate():
    spec = dual(9, 0, max_order=12, demand={"distribution": "uniform", "low": 0, "high": 6})
    with pytest.raises(BudgetError) as err:
        solve(spec, max_states=100_000)
    msg = str(err.value)
    assert msg.startswith("exact solve: needs ") and "states" in msg and "max_states" in msg and "\n" not in msg


def test_optimal_table_off_the_table_rows():
    spec = dual(2, 0)
    opt = solve(spec)
    b = opt.bounds
    far = opt.policy.act(np.array([[b.upper + 1, 0], [b.lower - 2, 0]], dtype=float))
    assert far[0].tolist() == [0, 0]  # above the bound: nothing
    low = opt.policy.act(np.array([[b.lower, 0]], dtype=float))[0]
    assert far[1, 0] == low[0] and far[1, 1] == min(low[1] + 2, 8)  # shortfall expedited
