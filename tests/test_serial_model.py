"""The serial chain: one period by hand, spec checks, and the Clark-Scarf decomposition against
the brute-force MDP of the same model (generic solver), exact policy evaluation and simulation.

The period checked by hand follows the timing stated in the model (common practice for the
cost accounting: in-transit stock charged at the shipping stage's rate).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import invbench
from invbench.baselines import clark_scarf as cs
from invbench.baselines.exact import solve
from invbench.baselines.policies.echelon import (EchelonBaseStockPolicy, InstallationBaseStockPolicy)
from invbench.baselines.policies.registry import make_policy, policies_for
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs.errors import SpecError
from invbench.envs.spec import spec_from_dict
from invbench.experiments.simulate import simulate

TINY = {"distribution": "empirical", "pmf": [0.3, 0.4, 0.2, 0.1]}


def serial(L, h, b=9.0, demand=None, **kw):
    return spec_from_dict({"model": "serial", "lead_times": list(L), "holding_costs": list(h), "shortage_cost": b,
                           "demand": demand or {"distribution": "poisson", "mean": 3.0}, **kw})


def test_one_period_by_hand():
    spec = serial([1, 2, 0], [3.0, 2.0, 1.0], b=10.0, max_orders=[9, 9, 9])
    # stage 1 net -1; stage 2 on-hand 4, 2 units arriving next period; stage 3 on-hand 1
    state = np.array([[-1, 4, 2, 1]])
    nxt, out = spec.model_def.step(spec, state, np.array([[5, 3, 6]]), np.array([2]))
    # stage 3 receives its 6 at once (lead time 0) -> 7, ships 3 -> 4; stage 2 ships min(5, 4) = 4
    # -> 0, its 3 are in transit; stage 1: -1 - 2 = -3 (3 backordered), the 4 arrive next period
    assert nxt.tolist() == [[-3 + 4, 0 + 2, 3, 4]]
    assert out.costs["holding"][0] == 0 * 3.0 + 0 * 2.0 + 4 * 1.0
    # in transit: 4 to stage 1 at h_2 = 2; 2 + 3 to stage 2 at h_3 = 1
    assert out.costs["in_transit"][0] == 4 * 2.0 + 5 * 1.0
    assert out.costs["shortage"][0] == 3 * 10.0
    assert out.flows["sales"][0] == 0 and out.flows["backordered"][0] == 3 and out.flows["supplied"][0] == 6


@pytest.mark.parametrize("changes,field", [
    ({"holding_costs": [1.0, 2.0]}, "instance.holding_costs"),
    ({"holding_costs": [2.0, 1.0, 0.5]}, "instance.holding_costs"),
    ({"lead_times": [1]}, "instance.lead_times"),
    ({"lead_times": [1, 1, 1, 1, 1, 1, 1], "holding_costs": [1.0] * 7}, "instance.lead_times"),
    ({"lead_times": [1, -1]}, "instance.lead_times[1]"),
    ({"lead_times": "1, 1"}, "instance.lead_times"),
    ({"holding_costs": [2.0, "x"]}, "instance.holding_costs[1]"),
    ({"max_orders": [5]}, "instance.max_orders"),
    ({"max_orders": [5, 5], "max_order": 5}, "instance.max_orders"),
    ({"lead_time": 2}, "instance.lead_time"),
    ({"shortage_cost": 0.0}, "instance.shortage_cost"),
])
def test_bad_specs_are_refused_naming_the_field(changes, field):
    base = {"model": "serial", "lead_times": [1, 1], "holding_costs": [2.0, 1.0], "demand": TINY}
    with pytest.raises(SpecError) as e:
        spec_from_dict({**base, **changes})
    assert str(e.value).startswith(field + ":") and "\n" not in str(e.value)


def test_spec_round_trips_through_toml(tmp_path):
    spec = serial([1, 2, 3], [3.0, 2.0, 1.0], max_orders=[30, 20, 10])
    spec.save(tmp_path / "s.toml")
    again = invbench.envs.spec.load_spec(tmp_path / "s.toml")
    assert again == spec and again.lead_times == (1, 2, 3)



def test_label_and_results_row_say_the_stage_lead_times_not_an_unused_default():
    from invbench.experiments.store import build_table
    from types import SimpleNamespace
    spec = serial([1, 2, 3], [3.0, 2.0, 1.0])
    assert spec.label.startswith("serial-L1+2+3-")
    row = build_table([{"cell_id": "c1", "suite": "s", "instance": spec.label, "kind": "optimum",
                        "status": "ok", "cost": 1.0}], {"c1": SimpleNamespace(instance=spec)}).iloc[0]
    # the model ignores the common lead time and holding cost: left empty, its own keys filled
    assert pd.isna(row["lead_time"]) and pd.isna(row["holding_cost"]) and row["shortage_cost"] == 9.0
    assert list(row["lead_times"]) == [1, 2, 3]

@pytest.mark.parametrize("L,h,b,demand", [
    ([1, 1], [2.0, 1.0], 9.0, TINY),
    ([1, 1], [1.0, 0.2], 19.0, TINY),
    ([1, 1], [3.0, 2.5], 4.0, {"distribution": "poisson", "mean": 1.0}),
    ([0, 1], [2.0, 1.0], 9.0, TINY),
    ([1, 0], [2.0, 1.0], 9.0, TINY),
])
def test_decomposition_equals_the_brute_force_mdp(L, h, b, demand):
    spec = serial(L, h, b, demand)
    cert = solve(spec)
    assert cert.method == "clark_scarf" and cert.lower == cert.upper == cert.cost
    mdp = solve(spec, method="rvi", rel_tol=1e-9)  # the generic solver on the full state
    assert mdp.converged and mdp.method == "rvi" and mdp.states > 50
    assert mdp.lower - 1e-9 <= cert.cost <= mdp.upper + 1e-9, (mdp.lower, cert.cost, mdp.upper)


def test_decomposition_equals_the_brute_force_mdp_with_three_stages():
    spec = serial([1, 1, 1], [3.0, 2.0, 1.0], 9.0, {"distribution": "empirical", "pmf": [0.5, 0.3, 0.2]})
    cert = solve(spec)
    mdp = solve(spec, method="rvi", rel_tol=1e-9)
    assert mdp.lower - 1e-9 <= cert.cost <= mdp.upper + 1e-9, (mdp.lower, cert.cost, mdp.upper)


@pytest.mark.parametrize("L,h,levels", [
    ([1, 2], [2.0, 1.0], None), ([2, 1], [1.5, 0.5], [5, 9]), ([1, 1, 1], [3.0, 2.0, 1.0], [4, 8, 9]),
    ([0, 2, 1], [3.0, 1.0, 1.0], [3, 9, 12]), ([1, 1], [2.0, 1.0], [7, 5]),  # levels falling upstream too
])
def test_formula_equals_exact_evaluation_of_the_policy(L, h, levels):
    spec = serial(L, h, 9.0, {"distribution": "poisson", "mean": 1.5})
    levels = levels or list(cs.optimal_levels(spec).levels)
    assert cs.formula_applies(spec, levels)
    formula = cs.echelon_cost(spec, levels)
    ev = evaluate_exact(spec, EchelonBaseStockPolicy(spec, levels))
    assert ev.cost == pytest.approx(formula.cost, rel=1e-7)
    for part in ("holding", "in_transit", "shortage"):
        assert ev.parts[part] == pytest.approx(formula.parts[part], rel=1e-6, abs=1e-9)


def test_formula_is_inside_the_simulation_ci_on_four_stages():
    spec = serial([1, 2, 1, 2], [4.0, 3.0, 2.0, 1.0], 19.0, {"distribution": "poisson", "mean": 4.0})
    opt = solve(spec)
    sim = simulate(spec, opt.policy, replications=40, periods=3000, warmup=300, seed=5)
    assert abs(sim.cost - opt.cost) <= 3 * sim.ci_halfwidth, (sim.cost, opt.cost, sim.ci_halfwidth)


def test_installation_equals_echelon_with_cumulative_levels():
    spec = serial([1, 2, 1], [3.0, 2.0, 1.0], 9.0, {"distribution": "poisson", "mean": 1.5})
    r = [4, 3, 2]
    inst, ech = InstallationBaseStockPolicy(spec, r), EchelonBaseStockPolicy(spec, list(np.cumsum(r)))
    ev = evaluate_exact(spec, ech)
    states = ev.index.states.astype(np.float32)
    assert np.array_equal(inst.act(states), ech.act(states))  # the same order in every reachable state
    assert evaluate_exact(spec, inst).cost == pytest.approx(ev.cost, rel=1e-9)


def test_searches_reach_the_optimum_and_the_heuristic_does_not_beat_it():
    spec = serial([2, 1, 1], [3.0, 2.0, 1.0], 19.0, {"distribution": "poisson", "mean": 5.0})
    opt = solve(spec)
    ech = make_policy(spec, "echelon_base_stock")
    inst = make_policy(spec, "installation_base_stock")
    heur = make_policy(spec, "shang_song")
    assert ech.s == list(opt.policy.s) and ech.optimum.cost == pytest.approx(opt.cost, rel=1e-12)
    assert list(np.cumsum(inst.r)) == list(opt.policy.s)
    assert heur.optimum.cost >= opt.cost * (1 - 1e-12)
    assert set(policies_for("serial")) == {"echelon_base_stock", "shang_song", "installation_base_stock"}


def test_small_caps_make_the_decomposition_refuse_and_the_search_evaluate_exactly():
    spec = serial([1, 1], [2.0, 1.0], 9.0, TINY, max_orders=[3, 3])
    with pytest.raises(SpecError, match=r"^instance\.max_orders: "):
        solve(spec)
    mdp = solve(spec, method="rvi")
    pol = make_policy(spec, "echelon_base_stock")
    assert pol.optimum.cost >= mdp.lower * (1 - 1e-9)
    assert abs(evaluate_exact(spec, pol).cost - pol.optimum.cost) <= 1e-7 * pol.optimum.cost


def test_policy_parameters_are_checked():
    spec = serial([1, 1], [2.0, 1.0], 9.0, TINY)
    with pytest.raises(SpecError, match=r"^param\.s: "):
        make_policy(spec, "echelon_base_stock", {"s": [1, 2, 3]})
    with pytest.raises(SpecError, match=r"^param\.r\[1\]: "):
        make_policy(spec, "installation_base_stock", {"r": [1, -2]})
    with pytest.raises(SpecError, match=r"^policy: "):
        make_policy(spec, "base_stock", {"S": 3})
