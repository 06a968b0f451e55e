"""Backorders with random lead times in sequence against the newsvendor closed form (scipy.stats).

Timing (this project's): an order placed in period t with lead time L arrives at the start of
period t + L, before that period's demand; costs are charged on the end-of-period net
inventory. With orders that never cross, everything placed up to period t - V has arrived by
the end of period t and nothing later has, where V = min_j (A_{t-j} + j) over the cut-offs A;
P(V > k) = prod_{j<=k} P(A > j) = P(L > k), so V is distributed as the lead time (Kaplan 1970;
Zipkin 2000, ch. 7, from memory). The end-of-period net inventory of period t is then the
position after ordering in period t - V minus the demand of periods t - V, ..., t: V + 1
periods. Base-stock on the position is optimal and its cost is the newsvendor cost

    min_S E[h (S - X)^+ + p (X - S)^+],   X = demand over V + 1 periods, V ~ lead-time pmf.

For Poisson(mu) demand X is the mixture sum_k p_k Poisson((k + 1) mu), for negative binomial
NB(n, q) demand sum_k p_k NB((k + 1) n, q) (sums of independent copies), computed here
with scipy.stats alone, not with the project's convolution. The solver's position space uses
this cost itself, so each case also evaluates the base-stock policy exactly on the full state
(net inventory and the orders out by age) stepped through the cut-off dynamics, and one
instance is solved on the full state.
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from invbench import load_spec, solve
from invbench.baselines.policies.registry import make_policy
from invbench.baselines.policy_eval import evaluate_exact


def newsvendor_cost(dists: list, weights: list[float], h: float, p: float) -> tuple[float, int]:
    """min over S of E[h (S - X)^+ + p (X - S)^+] for the mixture X, by scanning S."""
    top = int(max(d.ppf(1 - 1e-13) for d in dists)) + 2
    x = np.arange(top + 1)
    pmf = sum(w * d.pmf(x) for w, d in zip(weights, dists))
    levels = np.arange(top + 1)
    over = np.maximum(levels[:, None] - x[None, :], 0)
    under = np.maximum(x[None, :] - levels[:, None], 0)
    cost = (h * over + p * under) @ pmf
    S = int(np.argmin(cost))
    return float(cost[S]), S


CASES = [
    # (lead-time pmf, demand table, scipy distribution of one period's demand summed n times, h, p)
    ([0.2, 0.5, 0.3], {"distribution": "poisson", "mean": 2.0}, lambda n: stats.poisson(2.0 * n), 1.0, 9.0),
    ([0.0, 0.25, 0.5, 0.25], {"distribution": "poisson", "mean": 3.0}, lambda n: stats.poisson(3.0 * n), 1.0, 4.0),
    ([0.1, 0.2, 0.3, 0.4], {"distribution": "poisson", "mean": 1.5}, lambda n: stats.poisson(1.5 * n), 2.0, 19.0),
    # negative binomial mean 3, variance 6: n = 3, q = 0.5
    ([0.25, 0.5, 0.25], {"distribution": "negative_binomial", "mean": 3.0, "variance": 6.0},
     lambda n: stats.nbinom(3.0 * n, 0.5), 1.0, 9.0),
]


@pytest.mark.parametrize("pmf,demand,dist,h,p", CASES, ids=["poisson2", "poisson3-no-L0", "poisson1.5-p19", "negbin"])
def test_optimum_is_the_newsvendor_cost_of_demand_over_L_plus_one_periods(pmf, demand, dist, h, p):
    spec = load_spec({"model": "backorder", "lead_time": {"pmf": pmf}, "holding_cost": h, "shortage_cost": p,
                      "demand": demand})
    ref, S = newsvendor_cost([dist(k + 1) for k in range(len(pmf))], pmf, h, p)
    res = solve(spec)
    assert res.converged
    assert abs(res.cost - ref) <= 2e-6 * ref, (res.cost, ref)  # certified gap 1e-6 plus pmf truncation
    base = make_policy(spec, "base_stock")
    assert base.S == S and abs(base.optimum.cost - ref) <= 1e-8 * ref
    # not circular: exact evaluation steps the full state through the cut-off dynamics
    ev = evaluate_exact(spec, base)
    assert abs(ev.cost - ref) <= 1e-6 * ref, (ev.cost, ref)


def test_position_reduction_agrees_with_the_full_pipeline_state():
    # the full state (net inventory and the orders out by age) stepped over demand x cut-off
    spec = load_spec({"model": "backorder", "lead_time": {"pmf": [0.1, 0.2, 0.3, 0.4]}, "shortage_cost": 9.0,
                      "demand": {"distribution": "poisson", "mean": 1.0}})
    ref, _ = newsvendor_cost([stats.poisson(1.0 * (k + 1)) for k in range(4)], [0.1, 0.2, 0.3, 0.4], 1.0, 9.0)
    full = solve(spec, full_pipeline=True)
    assert full.representation == "backorder_full"
    assert abs(full.cost - ref) <= 2e-6 * ref, (full.cost, ref)
