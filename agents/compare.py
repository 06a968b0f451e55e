"""Where a policy differs from the optimum: state by state, weighted by where the policy lives.

On the policy's own reachable chain (exact evaluation, stationary distribution pi), each state
s where its order a differs from the optimal order a* costs, in the long run,
    regret(s) = Q*(s, a) - Q*(s, a*),   Q*(s, a) = c(s, a) + E[h*(s')] (h*: optimal relative values),
and by the average-cost performance-difference identity (Puterman 1994, from memory)
sum_s pi(s) regret(s) equals the policy's gap g - g*. Q* is computed by stepping s with both
orders against every demand value through the model's step function.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from invbench.envs.dynamics import step_fn
from invbench.envs.spec import InstanceSpec, load_spec


@dataclass
class PolicyComparison:
    """Share of (stationary) time the orders differ from optimal, and what that costs."""

    cost: float
    optimum: float
    share_states_differ: float  # stationary probability of states where orders differ
    states: int
    states_differ: int
    expected_regret: float | None  # sum of pi(s) * regret(s); ~ cost - optimum when covered
    uncovered_mass: float  # stationary mass of differing states whose successors the solver lacks
    worst: list[dict[str, Any]] = field(default_factory=list)
    note: str = ""

    @property
    def gap(self) -> float:
        return (self.cost - self.optimum) / self.optimum

    def to_dict(self) -> dict[str, Any]:
        return {"cost": self.cost, "optimum": self.optimum, "gap": self.gap,
                "share_states_differ": self.share_states_differ, "states": self.states,
                "states_differ": self.states_differ, "expected_regret": self.expected_regret,
                "uncovered_mass": self.uncovered_mass, "worst": list(self.worst), "note": self.note}


def _q_values(spec: InstanceSpec, solved: Any, states: np.ndarray, orders: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Q*(s, order) for each row, and whether every successor is in the solver's state table."""
    step = step_fn(spec)
    pmf = spec.demand.pmf().normalized()
    d = np.flatnonzero(pmf > 0)
    rows = np.repeat(np.arange(len(states)), len(d))
    nxt, parts = step(states[rows], orders[rows], np.tile(d, len(states)))
    w = np.tile(pmf[d], len(states))
    pos = solved.mdp.index.lookup(nxt)
    h = np.where(pos >= 0, solved.values[np.maximum(pos, 0)], 0.0)
    q = np.bincount(rows, weights=w * (parts.total + h), minlength=len(states))
    covered = np.bincount(rows, weights=(pos < 0).astype(float), minlength=len(states)) == 0
    return q, covered


def compare_with_optimal(spec: Any, policy: Any, solved: Any = None, *, top: int = 10) -> PolicyComparison:
    """Compare `policy` with the exact optimum of `spec` on the policy's stationary distribution."""
    from invbench.baselines.exact import solve
    from invbench.baselines.policy_eval import evaluate_exact

    spec = load_spec(spec)
    solved = solved if solved is not None else solve(spec)
    ev = evaluate_exact(spec, policy)
    pi = ev.stationary_distribution()
    states = ev.index.states
    mine = ev.orders  # [S, k]
    best = np.asarray(solved.policy.act(states.astype(np.float32)), dtype=np.int64).reshape(mine.shape)
    differ = np.any(mine != best, axis=1)
    note = ""
    regret = None
    uncovered = 0.0
    worst: list[dict[str, Any]] = []
    if solved.representation == "lost_sales" and solved.criterion == "average" and solved.values is not None:
        mine, best = mine[:, 0], best[:, 0]
        idx = np.flatnonzero(differ)
        q_mine, cov_a = _q_values(spec, solved, states[idx], mine[idx])
        q_best, cov_b = _q_values(spec, solved, states[idx], best[idx])
        covered = cov_a & cov_b
        r = q_mine - q_best
        uncovered = float(pi[idx][~covered].sum())
        regret = float((pi[idx] * np.where(covered, r, 0.0)).sum())
        order = np.argsort(-(pi[idx] * np.where(covered, r, 0.0)))[:top]
        worst = [{"state": states[idx[j]].tolist(), "probability": float(pi[idx[j]]), "order": int(mine[idx[j]]),
                  "optimal_order": int(best[idx[j]]), "regret": float(r[j]) if covered[j] else None}
                 for j in order]
        if uncovered > 0:
            note = "some differing states step outside the solver's state table; their regret is left out"
    else:
        note = "regret per state is computed for the lost-sales average-cost representation only"
    return PolicyComparison(cost=ev.cost, optimum=float(solved.cost), share_states_differ=float(pi[differ].sum()),
                            states=len(states), states_differ=int(differ.sum()), expected_regret=regret,
                            uncovered_mass=uncovered, worst=worst, note=note)
