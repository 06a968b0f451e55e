"""Learning-curve points with an exact cost skip the simulation; exact evaluations are bounded.

A point's exact cost (when the policy's chain is small) makes its simulation redundant, and the
simulation is 20-100 times dearer; a point whose chain mixes slowly gives up its exact cost once
`CURVE_EXACT_WORK` is spent, rather than taking minutes.
"""
from __future__ import annotations

import numpy as np
import pytest
import torch
from scipy import stats

from invbench.agents import callbacks
from invbench.agents.callbacks import TrainingMonitor
from invbench.agents.rollout_judge import Judge
from invbench.agents.settings import sb3_settings
from invbench.baselines.policy_eval import EXPLORE_SWEEPS, evaluate_exact
from invbench.envs.errors import BudgetError
from invbench.envs.spec import spec_from_dict

torch.set_num_threads(1)
# backorders, lead time 0: with order-up-to S the period cost is the newsvendor cost of one
# period's demand (common practice; Zipkin 2000, Foundations of Inventory Management, ch. 6)
NEWSVENDOR = spec_from_dict({"model": "backorder", "lead_time": 0, "holding_cost": 1.0, "shortage_cost": 9.0,
                             "demand": {"distribution": "poisson", "mean": 4}})
QUIET = {"progress": False, "eval_replications": 4, "eval_periods": 50, "eval_warmup": 10, "checkpoint_every": 0}


class _UpTo:
    def __init__(self, S: int) -> None:
        self.S = S

    def act(self, states):
        return np.maximum(self.S - np.asarray(states, dtype=np.int64).sum(axis=1), 0)


def _newsvendor(S: int) -> float:
    d = np.arange(0, 200)
    pmf = stats.poisson(4).pmf(d)
    return float(np.sum(pmf * (1.0 * np.maximum(S - d, 0) + 9.0 * np.maximum(d - S, 0))))


def _counting_simulate(monkeypatch):
    calls = []
    real = callbacks.simulate

    def counted(*args, **kwargs):
        calls.append(1)
        return real(*args, **kwargs)

    monkeypatch.setattr(callbacks, "simulate", counted)
    return calls


def test_a_point_with_an_exact_cost_is_not_simulated(monkeypatch):
    calls = _counting_simulate(monkeypatch)
    mon = TrainingMonitor(NEWSVENDOR, sb3_settings("ppo", QUIET), steps=10, out=None, optimum=_newsvendor(7))
    row = mon.record(0, _UpTo(7))
    assert calls == [] and mon.last_simulated is None
    assert row["cost"] == row["exact_cost"] == pytest.approx(_newsvendor(7), rel=1e-7)  # scipy.stats; the tail beyond the kept demand pmf
    assert row["ci_halfwidth"] == 0.0 and row["gap_pct"] == pytest.approx(0.0, abs=1e-6)
    mon.record(1, _UpTo(3))
    assert mon.best[1].S == 7  # chosen on the exact costs
    mon.close()


def test_the_first_point_without_an_exact_cost_simulates_the_best_so_far(monkeypatch):
    calls = _counting_simulate(monkeypatch)
    mon = TrainingMonitor(NEWSVENDOR, sb3_settings("ppo", QUIET), steps=10, out=None)
    mon.record(0, _UpTo(7))
    real_exact = evaluate_exact

    def fails(*args, **kwargs):
        raise BudgetError("over the state budget")

    import invbench.baselines.policy_eval as policy_eval
    monkeypatch.setattr(policy_eval, "evaluate_exact", fails)
    row = mon.record(1, _UpTo(2))
    # this point and the incumbent are simulated on the same common random numbers and compared so
    assert len(calls) == 2 and row["exact_cost"] is None and row["ci_halfwidth"] > 0
    assert mon.best[1].S == 7 and mon.best[0] == pytest.approx(float(mon.simulated(_UpTo(7)).cost))
    assert mon.best[0] < row["cost"]
    monkeypatch.setattr(policy_eval, "evaluate_exact", real_exact)
    mon.record(2, _UpTo(7))  # exact is not tried again: every later point is simulated
    assert mon.rows[-1]["exact_cost"] is None and mon.last_simulated is not None
    mon.close()


def test_exact_evaluation_gives_up_when_its_work_bound_is_spent():
    spec = spec_from_dict({"model": "lost_sales", "lead_time": 2, "shortage_cost": 9.0,
                           "demand": {"distribution": "poisson", "mean": 4}})
    pol = _UpTo(14)
    full = evaluate_exact(spec, pol)
    assert evaluate_exact(spec, pol, max_work=1e12).cost == full.cost  # a loose bound changes nothing
    nnz = full.P.nnz
    # building the chain may use half the work: just short of that, it is not built
    with pytest.raises(BudgetError, match="transitions \\(max_work\\)"):
        evaluate_exact(spec, pol, max_work=2 * EXPLORE_SWEEPS * nnz - 2 * EXPLORE_SWEEPS)
    # built (it generates at most 50 x the stored transitions here), then the rest in sweeps: not
    # enough for a tolerance no iteration reaches
    work = 100 * EXPLORE_SWEEPS * nnz
    sweeps = int((work - EXPLORE_SWEEPS * nnz) // nnz)
    with pytest.raises(BudgetError, match=f"not converged within {sweeps:,} sweeps"):
        evaluate_exact(spec, pol, max_work=work, rel_tol=1e-300)
    with pytest.raises(Exception, match="max_work"):
        evaluate_exact(spec, pol, max_work=0)


def test_judge_simulates_an_exact_only_candidate_when_compared_with_a_simulated_one():
    sims = []

    def simulate(policy):
        sims.append(policy)
        return {"a": 5.0, "b": 6.0}[policy]

    judge = Judge(simulate)
    assert judge.offer("classical", "a", {"exact_cost": 5.1, "cost": 5.1}, None)
    assert not judge.offer("round 1", "c", {"exact_cost": 5.2, "cost": 5.2}, None)
    assert sims == []  # both exact: compared exactly
    assert not judge.offer("round 2", "b", {"exact_cost": None, "cost": 6.0}, 6.0)
    assert sims == ["a"]  # the incumbent simulated once, then kept
    assert not judge.offer("round 3", "d", {"exact_cost": None, "cost": 5.5}, 5.5)
    assert sims == ["a"] and judge.best.label == "classical"


def test_judge_confirms_a_win_on_the_simulation_alone_exactly():
    # The least of many noisy simulations is biased low (the winner's curse; common practice),
    # so a simulated win is checked on the exact costs where both chains allow one.
    exact_asked = []
    exact = {"start": 5.0, "b": 5.05, "c": None, "d": None}  # the chains of c and d too large: refused

    def confirm(policy):
        exact_asked.append(policy)
        return exact[policy]

    judge = Judge(lambda p: {"start": 5.1, "b": 4.9, "c": 4.8, "d": 4.7}[p], confirm)
    judge.offer("classical", "start", {"exact_cost": 5.0, "cost": 5.0}, None)
    assert not judge.offer("round 1", "b", {"exact_cost": None, "cost": 4.9}, 4.9)  # exactly 1 % worse
    assert judge.best.label == "classical" and exact_asked == ["b"]
    assert judge.history[-1]["exact_cost"] == 5.05
    assert judge.offer("round 2", "c", {"exact_cost": None, "cost": 4.8}, 4.8)  # no exact cost: simulation decides
    assert exact_asked == ["b", "c"]
    assert judge.offer("round 3", "d", {"exact_cost": None, "cost": 4.7}, 4.7)
    assert exact_asked == ["b", "c", "d"]  # c's confirmation is not tried again
    assert not judge.offer("round 4", "b", {"exact_cost": None, "cost": 4.9}, 4.9)  # a simulated loss: no confirmation
    assert exact_asked == ["b", "c", "d"]
