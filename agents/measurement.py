"""What the agents use from the rest of the bench: the certified optimum and the final measurement.

The solver and evaluator are imported inside the functions, so loading the agents stays light.
"""
from __future__ import annotations

from typing import Any

from invbench.envs.errors import BudgetError
from invbench.envs.spec import InstanceSpec


def solve_optimum(spec: InstanceSpec, progress: bool = False) -> Any | None:
    """The SolveResult of the exact solver, or None when the instance is over its budget."""
    from invbench.baselines.exact import solve
    try:
        return solve(spec, progress=progress)
    except BudgetError:
        return None


def measure(spec: InstanceSpec, policy: Any, optimum: float | None, seed: int = 0) -> dict[str, Any]:
    """Final measurement: exact when the state space allows, else simulated with its CI."""
    from invbench.experiments.evaluate import evaluate
    d = evaluate(spec, policy, method="auto", optimum=optimum, seed=seed).to_dict()
    return {"cost": d["cost"], "ci_halfwidth": d["ci_halfwidth"], "method": d["method"],
            "optimum": optimum, "gap": d["gap"], "states": d.get("states"), "note": d.get("note", "")}
