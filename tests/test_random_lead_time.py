"""Random lead times (lost sales, backorders): the cut-off construction, the variant with orders
drawn independently, the spec table and its errors, and common random numbers with fixed runs.

Outside references: scipy.stats.chisquare for the simulated lead times against the pmf; the
construction itself (one cut-off per period, orders placed at least that long ago arrive) is
Kaplan's (1970), as the issue states it; a point mass must reproduce the fixed lead time.
"""
from __future__ import annotations

import gymnasium as gym
import numpy as np
import pytest
from scipy import stats

import invbench  # noqa: F401  (registers the env ids)
from invbench import SpecError, load_spec
from invbench.baselines.exact import solve
from invbench.baselines.policies.registry import make_policy
from invbench.baselines.policy_eval import evaluate_exact
from invbench.envs.errors import SimulationOnly
from invbench.envs.random_inputs import PeriodInputs
from invbench.cli import main
from invbench.experiments.evaluate import evaluate
from invbench.experiments.simulate import simulate

DEMAND = {"distribution": "poisson", "mean": 2.0}
PMFS = [[0.2, 0.5, 0.3], [0.0, 0.25, 0.5, 0.25], [0.1, 0.2, 0.3, 0.4]]


def spec_with(model: str, lead_time, **kw):
    return load_spec({"model": model, "lead_time": lead_time, "shortage_cost": 9.0, "demand": DEMAND, **kw})


def arrival_periods(spec, orders: list[int], reps: int, seed: int, periods: int) -> np.ndarray:
    """Period in which each order arrives, per replication: orders[i] units placed in period i
    (distinct powers of two, so each period's receipt names the orders in it), no demand."""
    model = spec.model_def
    inputs = PeriodInputs(spec)
    rngs = inputs.streams(seed)
    state = model.start_state(spec, reps)
    arrived = np.full((reps, len(orders)), -1)
    before = np.zeros(reps, dtype=np.int64)
    for t in range(periods):
        q = orders[t] if t < len(orders) else 0
        state, out = model.step(spec, state, np.full((reps, 1), q), np.zeros(reps, dtype=np.int64),
                                **inputs.draw(rngs, reps))
        got = out.end_level - before  # with no demand, stock rises by exactly what arrived
        before = out.end_level
        for i, size in enumerate(orders):
            arrived[(got & size) > 0, i] = t
    assert np.all(arrived >= 0)  # every order arrived within the horizon
    return arrived


@pytest.mark.parametrize("model", ["lost_sales", "backorder"])
@pytest.mark.parametrize("pmf", PMFS)
@pytest.mark.parametrize("crossing", [False, True])
def test_simulated_lead_times_follow_the_pmf(model, pmf, crossing):
    spec = spec_with(model, {"pmf": pmf, "crossing": crossing}, max_order=8)
    reps = 4000
    arrived = arrival_periods(spec, [1, 2, 4, 8], reps, seed=7, periods=12)
    lead = arrived - np.arange(4)[None, :]
    counts = np.bincount(lead.ravel(), minlength=len(pmf))
    assert len(counts) == len(pmf)  # never longer than the longest lead time
    keep = np.asarray(pmf) > 0
    assert counts[~keep].sum() == 0  # impossible lead times never occur
    # chi-square goodness of fit of all orders' lead times against the pmf (scipy.stats)
    p = stats.chisquare(counts[keep], np.asarray(pmf)[keep] * counts.sum()).pvalue
    assert p > 1e-3, (counts, pmf, p)


@pytest.mark.parametrize("model", ["lost_sales", "backorder"])
def test_no_order_overtakes_an_older_one_but_crossing_orders_do(model):
    pmf = [0.1, 0.2, 0.3, 0.4]
    orders = [1, 2, 4, 8, 16, 32]
    seq = arrival_periods(spec_with(model, {"pmf": pmf}, max_order=64), orders, 3000, seed=3, periods=14)
    assert np.all(np.diff(seq, axis=1) >= 0)  # in sequence: each order no later than the next
    cross = arrival_periods(spec_with(model, {"pmf": pmf, "crossing": True}, max_order=64), orders, 3000,
                            seed=3, periods=14)
    assert np.any(np.diff(cross, axis=1) < 0)  # drawn per order: some do overtake


def test_cutoff_law_gives_each_order_the_pmf():
    # Kaplan's construction: P(L > k) = prod_{j <= k} P(A > j) must equal the pmf's survival
    for pmf in PMFS:
        law = spec_with("lost_sales", {"pmf": pmf}).lead_time_law
        above = 1.0 - np.cumsum(law.cutoff_pmf())  # P(A > j)
        assert np.allclose(np.cumprod(above), 1.0 - np.cumsum(pmf), atol=1e-12)


def test_a_point_mass_is_the_fixed_lead_time():
    fixed, point = spec_with("lost_sales", 2), spec_with("lost_sales", {"pmf": [0, 0, 1]})
    assert point.state_dim == fixed.state_dim == 2
    a, b = solve(fixed), solve(point)
    assert abs(a.cost - b.cost) <= 1e-9 * a.cost and a.states == b.states
    pol = make_policy(fixed, "base_stock", {"S": 7})
    sf = simulate(fixed, pol, replications=10, periods=300, warmup=20, seed=5)
    sp = simulate(point, make_policy(point, "base_stock", {"S": 7}), replications=10, periods=300, warmup=20, seed=5)
    assert sf.cost == sp.cost and np.array_equal(sf.per_replication, sp.per_replication)  # bit for bit


def test_demand_stream_is_the_same_as_with_a_fixed_lead_time():
    # common random numbers: the cut-off has a stream of its own
    seen = []
    for lt in (2, {"pmf": [0.1, 0.2, 0.3, 0.4]}):
        env = gym.make("invbench/Backorder-v0", spec=spec_with("backorder", lt))
        env.reset(seed=42)
        seen.append([env.step(1)[4]["demand"] for _ in range(200)])
    assert seen[0] == seen[1]


def test_structured_builds_decline_random_lead_times():
    # the fixed-lead-time fast build is opted out per instance: the MDP comes from the generic build
    for model in ("lost_sales", "backorder"):
        spec = spec_with(model, {"pmf": [0.2, 0.5, 0.3]})
        space = spec.model_def.exact_space(spec)
        assert space.fast_build(space.initial_bounds()) is None
        assert space.demand_split() is None  # nor the matrix-free path, which assumes a fixed lead time


def test_crossing_is_simulated_only():
    spec = spec_with("lost_sales", {"pmf": [0.5, 0.0, 0.5], "crossing": True})
    with pytest.raises(SimulationOnly, match="lead_time.crossing"):
        solve(spec)
    pol = make_policy(spec, "base_stock", {"S": 6})
    with pytest.raises(SimulationOnly):
        evaluate_exact(spec, pol)
    ev = evaluate(spec, pol, replications=10, periods=200, warmup=20)
    assert ev.method == "simulated" and "lead_time.crossing" in ev.note
    with pytest.raises(SpecError, match="policy: myopic is not defined for a crossing lead time"):
        make_policy(spec, "myopic")


def test_discounted_random_backorders_are_solved_on_the_full_pipeline():
    spec = spec_with("backorder", {"pmf": [0.3, 0.4, 0.3]}, discount=0.9)
    res = solve(spec)
    assert res.representation == "backorder_full" and res.converged
    ev = evaluate_exact(spec, res.policy)
    assert abs(ev.cost - res.cost) <= 1e-5 * res.cost


def test_table_round_trips_through_toml(tmp_path):
    spec = spec_with("backorder", {"pmf": [0.25, 0.5, 0.25, 0.0]}, name="rl")
    assert spec.lead_time_law.probs == (0.25, 0.5, 0.25)  # trailing zeros dropped
    spec.save(tmp_path / "s.toml")
    again = load_spec(tmp_path / "s.toml")
    assert again == spec and again.mean_lead_time == 1.0 and again.longest_lead_time == 2


@pytest.mark.parametrize("lead_time,field,fragment", [
    ({"pmf": [0.5, 0.6]}, "instance.lead_time.pmf", "summing to 1"),
    ({"pmf": [1.2, -0.2]}, "instance.lead_time.pmf[0]", "in [0, 1]"),
    ({"pmf": []}, "instance.lead_time.pmf", "1 to 51"),
    ({"pmf": [0.0] * 51 + [1.0]}, "instance.lead_time.pmf", "1 to 51"),
    ({"pmf": "0.5, 0.5"}, "instance.lead_time.pmf", "list"),
    ({"pmf": [0.5, True]}, "instance.lead_time.pmf[1]", "probability"),
    ({}, "instance.lead_time.pmf", "required"),
    ({"pmf": [1.0], "mean": 2}, "instance.lead_time.mean", "allowed: pmf, crossing"),
    ({"pmf": [1.0], "crossing": "yes"}, "instance.lead_time.crossing", "true or false"),
    ({"pmf": [0.5, 0.0, 0.5]}, "instance.lead_time.pmf", "hazard"),
    ({"pmf": [0.4, 0.1, 0.5]}, "instance.lead_time.pmf", "hazard"),
    ([0.5, 0.5], "instance.lead_time", "integer in [0, 50]"),
])
def test_bad_lead_time_tables_name_the_field(lead_time, field, fragment):
    with pytest.raises(SpecError) as e:
        spec_with("lost_sales", lead_time)
    msg = str(e.value)
    assert msg.startswith(field) and fragment in msg and "\n" not in msg, msg


def test_other_models_refuse_a_table():
    with pytest.raises(SpecError, match="instance.lead_time: .*lost_sales and backorder models only"):
        load_spec({"model": "perishable", "lead_time": {"pmf": [0.5, 0.5]}, "demand": DEMAND})


def test_cli_refuses_a_bad_table_in_one_line(tmp_path, capsys):
    path = tmp_path / "s.toml"
    path.write_text('[instance]\nmodel = "lost_sales"\nlead_time = { pmf = [0.5, 0.0, 0.5] }\n'
                    '[instance.demand]\ndistribution = "poisson"\nmean = 2.0\n')
    assert main(["solve", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "instance.lead_time.pmf" in err, err


@pytest.mark.parametrize("agent,sets", [
    ("ppo", ["n_envs=8", "n_steps=16", "batch_size=64", "n_epochs=1"]),
    ("rollout", ["states_per_iteration=100", "rollouts=2", "epochs=2", "iterations=1", "chains=20"]),
])
@pytest.mark.parametrize("crossing", [False, True])
def test_invbench_train_runs_on_a_random_lead_time(agent, sets, crossing, tmp_path, capsys):
    import json
    path = tmp_path / "s.toml"
    spec_with("lost_sales", {"pmf": [0.2, 0.5, 0.3], "crossing": crossing}).save(path)
    quick = ["threads=1", "eval_replications=4", "eval_periods=50", "eval_warmup=10", *sets]
    args = ["train", str(path), "--agent", agent, "--steps", "512", "--out", str(tmp_path / "run"), "--json"]
    assert main(args + [a for s in quick for a in ("--set", s)]) == 0
    res = json.loads(capsys.readouterr().out)
    measured = res["measured"]
    # in sequence: solved and measured exactly; crossing: no optimum, measured by simulation
    assert measured["method"] == ("simulated" if crossing else "exact"), measured
    assert (measured["optimum"] is None) == crossing and measured["cost"] > 0


@pytest.mark.parametrize("model", ["lost_sales", "backorder"])
def test_bounds_that_bind_are_widened(model):
    from invbench.envs.models.exact_space import Bounds
    spec = spec_with(model, {"pmf": [0.1, 0.2, 0.3, 0.4]})
    ref = solve(spec)
    tight = Bounds(upper=3, lower=0 if model == "lost_sales" else -3)
    res = solve(spec, bounds=tight)
    assert res.widenings > 0 and res.bounds.upper > 3
    assert abs(res.cost - ref.cost) <= 2e-6 * ref.cost


def test_over_budget_solve_is_refused_with_the_estimate():
    from invbench.envs.errors import BudgetError
    spec = spec_with("lost_sales", {"pmf": [0.2] * 5})
    with pytest.raises(BudgetError, match=r"exact solve: needs [\d,]+ states.*state budget of 100"):
        solve(spec, max_states=100)
