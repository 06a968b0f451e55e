"""Late imports of the exact solver and the evaluator, so agents load without them.

The agents only need three things from the rest of the bench: the certified optimum, the
exact/simulated evaluation of a policy, and the exact chain of a policy for the comparison.
"""
from __future__ import annotations

from typing import Any

from invbench.envs.errors import BudgetError
from invbench.envs.spec import InstanceSpec

from .crn_eval import crn_cost


def solve_optimum(spec: InstanceSpec, progress: bool = False) -> Any | None:
    """The SolveResult of the exact solver, or None when it is absent or over its budget."""
    try:
        from invbench.baselines.exact import solve
    except ImportError:
        return None
    try:
        return solve(spec, progress=progress)
    except BudgetError:
        return None


def measure(spec: InstanceSpec, policy: Any, optimum: float | None, seed: int = 0) -> dict[str, Any]:
    """Final measurement: exact when the state space allows, else simulated with its CI."""
    try:
        from invbench.experiments.evaluate import evaluate
    except ImportError:
        evaluate = None
    if evaluate is not None:
        ev = evaluate(spec, policy, method="auto", optimum=optimum, seed=seed)
        d = ev.to_dict()
        return {"cost": d["cost"], "ci_halfwidth": d["ci_halfwidth"], "method": d["method"],
                "optimum": optimum, "gap": d["gap"], "states": d.get("states"), "note": d.get("note", "")}
    est = crn_cost(spec, policy.act, replications=100, periods=2000, warmup=200, seed=seed)
    gap = (est.cost - optimum) / optimum if optimum else None
    return {"cost": est.cost, "ci_halfwidth": est.ci_halfwidth, "method": "simulated", "optimum": optimum,
            "gap": gap, "states": None, "note": "crn fallback (evaluator not installed)"}
