"""Saved policies of every kind: the optimal table (all states or reachable ones), classical
policies and their parameters, the table as CSV/Parquet; tampered or mismatched files refused.

Outside reference: with backorders, no fixed cost and no cap binding, the optimal policy is an
order-up-to policy at the critical fractile p / (p + h) of demand over L + 1 periods (Karlin &
Scarf 1958; Zipkin 2000, from memory), computed here with scipy.stats.poisson.
"""
from __future__ import annotations

import json
import pickle

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import invbench
from invbench.baselines.artifact_io import META, PolicyFileError
from invbench.baselines.exact import reachable_states
from invbench.baselines.policies.registry import policies_for
from invbench.envs.models import MODELS
from invbench.envs.spec import spec_from_dict

NAMES = sorted(MODELS)


def example(name: str, **changes):
    return spec_from_dict({"model": name, **MODELS[name].example, **changes})


def _env_states(spec, n=400, hi=12, seed=0):
    """Random states within the model's minimum (generic: from state_low), up to `hi` units."""
    low = np.maximum(spec.model_def.state_low(spec), -hi).astype(np.int64)
    rng = np.random.default_rng(seed)
    return rng.integers(low, hi + 1, size=(n, spec.state_dim))


@pytest.fixture(scope="module")
def solved():
    return {name: invbench.solve(example(name)) for name in NAMES}


@pytest.mark.parametrize("name", NAMES)
def test_full_table_round_trip_gives_the_same_orders(solved, name, tmp_path):
    res = solved[name]
    spec = res.policy.spec
    d = invbench.save_policy(res, tmp_path / "opt")
    back = invbench.load_policy(d, spec)
    if res.mdp is None:  # an optimum found by a decomposition is a classical policy, saved as one
        assert back.artifact.kind == "classical"
        states = _env_states(spec)
        np.testing.assert_array_equal(back.act(states), res.policy.act(states))
        return
    assert back.artifact.kind == "table" and back.complete
    states = res.mdp.states if res.mdp.states.shape[1] == spec.state_dim else _env_states(spec)
    states = np.vstack([states, _env_states(spec)])
    try:
        want = res.policy.act(states)
    except invbench.SpecError:  # some random states lie off the table: compare those on it
        keep = [i for i in range(len(states)) if _acts(res.policy, states[i:i + 1])]
        states, want = states[keep], res.policy.act(states[keep])
    np.testing.assert_array_equal(back.act(states), want)


def _acts(policy, state) -> bool:
    try:
        policy.act(state)
        return True
    except invbench.SpecError:
        return False


@pytest.mark.parametrize("name", NAMES)
def test_reachable_table_keeps_reachable_states_and_refuses_others(solved, name, tmp_path):
    res = solved[name]
    spec = res.policy.spec
    d = invbench.save_policy(res, tmp_path / "reach", states="reachable")
    back = invbench.load_policy(d)
    if res.mdp is None:  # a decomposition's optimum is a classical policy: no table to cut down
        assert back.artifact.kind == "classical"
        return
    reach = reachable_states(res.mdp, res.choice)
    assert len(back.index) == len(reach) and not back.complete
    np.testing.assert_array_equal(back.orders[np.argsort(back.index.keys)].shape, res.policy.orders[reach].shape)
    if res.mdp.states.shape[1] == spec.state_dim:  # env states are solver states: compare on them
        np.testing.assert_array_equal(back.act(res.mdp.states[reach]), res.policy.act(res.mdp.states[reach]))
        off = np.setdiff1d(np.arange(res.mdp.n_states), reach)
        inside = off[spec.model_def.position(spec, res.mdp.states[off]) <= res.bounds.upper]
        if len(inside):
            with pytest.raises(invbench.SpecError, match="not in the saved table"):
                back.act(res.mdp.states[inside[:1]])


def test_backorder_table_is_order_up_to_the_critical_fractile(tmp_path):
    # Outside reference: critical fractile p/(p+h) of Poisson demand over L+1 periods (scipy.stats).
    spec = invbench.load_spec({"model": "backorder", "lead_time": 2, "holding_cost": 1.0, "shortage_cost": 9.0,
                               "max_order": 40, "demand": {"distribution": "poisson", "mean": 4}})
    S = int(stats.poisson.ppf(9.0 / 10.0, 4 * 3))
    d = invbench.save_policy(invbench.solve(spec), tmp_path / "opt")
    back = invbench.load_policy(d, spec)
    states = np.array([[y - 3, 2, 1] for y in range(S - 10, S + 5)] if spec.state_dim == 3 else
                      [[y - 3, 3] for y in range(S - 10, S + 5)])
    want = np.maximum(S - states.sum(axis=1), 0)
    np.testing.assert_array_equal(back.act(states), want)


@pytest.mark.parametrize("name", NAMES)
def test_classical_policies_round_trip_with_their_parameters(name, tmp_path):
    spec = example(name)
    states = _env_states(spec, hi=8)
    done = 0
    for pname in policies_for(name):
        try:
            pol = invbench.make_policy(pname, spec)
        except invbench.SpecError:  # e.g. constant_order cannot be optimised under backorders
            continue
        done += 1
        d = invbench.save_policy(pol, tmp_path / pname)
        meta = json.loads((d / META).read_text())
        assert meta["kind"] == "classical" and meta["policy"] == {"name": pname, "params": pol.params()}
        assert not (d / "table.safetensors").exists()  # parameters only, no arrays
        back = invbench.load_policy(d, spec)
        assert back.params() == pol.params()
        np.testing.assert_array_equal(back.act(states), pol.act(states))
    assert done >= 1


def test_make_policy_with_parameters_and_optimal(tmp_path):
    spec = example("lost_sales")
    assert invbench.make_policy("base_stock", spec, S=7).params() == {"S": 7}
    opt = invbench.make_policy("optimal", spec)
    assert opt.describe() == "optimal (table)"
    with pytest.raises(invbench.SpecError, match="name: must be one of optimal, base_stock"):
        invbench.make_policy("nope", spec)
    with pytest.raises(invbench.SpecError, match="param.T: unknown parameter"):
        invbench.make_policy("base_stock", spec, T=3)
    with pytest.raises(invbench.SpecError, match="states: 'reachable' needs the solve result"):
        invbench.save_policy(opt, tmp_path / "x", states="reachable")
    with pytest.raises(invbench.SpecError, match="cannot save a function"):
        invbench.save_policy(lambda obs: obs[:, 0], tmp_path / "y")


@pytest.mark.parametrize("suffix", [".csv", ".parquet"])
def test_table_export_for_study(solved, tmp_path, suffix):
    res = solved["lost_sales"]
    spec = res.policy.spec
    p = invbench.export_table(res, tmp_path / f"table{suffix}")
    df = pd.read_csv(p) if suffix == ".csv" else pd.read_parquet(p)
    labels = spec.model_def.state_labels(spec)
    assert list(df.columns) == labels + ["order (units)"]
    assert len(df) == res.states
    np.testing.assert_array_equal(df["order (units)"].to_numpy(), res.policy.act(df[labels].to_numpy()))
    r = invbench.export_table(res, tmp_path / f"reach{suffix}", states="reachable")
    assert len(pd.read_csv(r) if suffix == ".csv" else pd.read_parquet(r)) == len(reachable_states(res.mdp, res.choice))
    with pytest.raises(invbench.SpecError, match="must end in .csv or .parquet"):
        invbench.export_table(res, tmp_path / "t.xlsx")


@pytest.fixture()
def saved_table(solved, tmp_path):
    return invbench.save_policy(solved["lost_sales"], tmp_path / "opt")


def test_edited_table_is_refused(saved_table):
    blob = bytearray((saved_table / "table.safetensors").read_bytes())
    blob[-1] ^= 0x01  # one order changed by one unit
    (saved_table / "table.safetensors").write_bytes(bytes(blob))
    with pytest.raises(PolicyFileError, match="checksum"):
        invbench.load_policy(saved_table)


def test_edited_policy_json_is_refused(saved_table, tmp_path):
    meta = json.loads((saved_table / META).read_text())
    meta["table"]["bounds"]["upper"] += 1
    (saved_table / META).write_text(json.dumps(meta))
    with pytest.raises(PolicyFileError, match="edited after export"):
        invbench.load_policy(saved_table)
    spec = example("lost_sales")
    d = invbench.save_policy(invbench.make_policy("base_stock", spec, S=9), tmp_path / "bs")
    meta = json.loads((d / META).read_text())
    meta["policy"]["params"]["S"] = 90
    (d / META).write_text(json.dumps(meta))
    with pytest.raises(PolicyFileError, match="edited after export"):
        invbench.load_policy(d)


class _Boom:
    def __init__(self, target: str) -> None:
        self.target = target

    def __reduce__(self):
        return (open, (self.target, "w"))


def test_pickle_in_place_of_table_is_refused_and_never_run(saved_table, tmp_path):
    target = tmp_path / "pwned"
    (saved_table / "table.safetensors").write_bytes(pickle.dumps(_Boom(str(target))))
    with pytest.raises(PolicyFileError, match="pickle"):
        invbench.load_policy(saved_table)
    assert not target.exists()


def test_instance_is_matched_by_content(saved_table):
    spec = example("lost_sales")
    assert invbench.load_policy(saved_table, spec.with_(name="renamed")).spec.name == "renamed"
    with pytest.raises(PolicyFileError, match="shortage_cost"):
        invbench.load_policy(saved_table, spec.with_(shortage_cost=spec.shortage_cost + 1))


def test_save_refuses_a_foreign_folder_and_a_file(tmp_path):
    spec = example("lost_sales")
    pol = invbench.make_policy("base_stock", spec, S=5)
    (tmp_path / "notes").mkdir()
    (tmp_path / "notes" / "todo.txt").write_text("mine")
    with pytest.raises(invbench.SpecError, match="non-empty folder without a saved policy"):
        invbench.save_policy(pol, tmp_path / "notes")
    (tmp_path / "f").write_text("x")
    with pytest.raises(invbench.SpecError, match="existing file"):
        invbench.save_policy(pol, tmp_path / "f")
    d = invbench.save_policy(pol, tmp_path / "p")
    invbench.save_policy(invbench.make_policy("base_stock", spec, S=6), d)  # a saved policy is replaced
    assert invbench.load_policy(d).params() == {"S": 6}


def test_committed_learned_policies_of_the_earlier_format_still_load():
    from pathlib import Path
    d = Path(__file__).parent.parent / "experiments/results/classic-lost-sales/policies/L1p4-rollout-seed0"
    pol = invbench.load_policy(d)
    assert pol.artifact.kind == "learned" and pol.act(np.array([[3]])).shape == (1,)
