"""Evaluate a policy on an instance: exactly when the state space allows, else by simulation.

The result says which was used, and carries the gap to the optimum when one is given.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import math

import numpy as np

from invbench.baselines.policy_eval import DEFAULT_MAX_STATES, evaluate_exact
from invbench.envs.errors import BudgetError, SpecError
from invbench.envs.spec import load_spec

from invbench.baselines.policy import as_policy
from invbench.envs.checks import check_count

from .simulate import (DEFAULT_MAX_MEMORY_MB, DEFAULT_MAX_PERIOD_STEPS, check_limit, check_run,
                       check_simulation_budget, simulate)

METHODS = ("auto", "exact", "simulate")


@dataclass
class Evaluation:
    policy: str
    cost: float
    ci_halfwidth: float
    parts: dict[str, float]  # cost per period by named part (holding, shortage, outdating, ...)
    method: str  # "exact" or "simulated"
    criterion: str
    seconds: float
    optimum: float | None = None
    states: int | None = None
    note: str = ""
    params: dict[str, Any] = field(default_factory=dict)
    clipped_orders: int = 0

    def __getattr__(self, key: str) -> float:
        parts = self.__dict__.get("parts") or {}
        if key in parts:  # cost parts read as attributes (ev.holding), whatever the model
            return parts[key]
        raise AttributeError(key)

    @property
    def gap(self) -> float | None:
        """Relative excess cost over the optimum, (cost - optimum) / optimum."""
        if self.optimum is None or self.optimum == 0:
            return None
        return (self.cost - self.optimum) / self.optimum

    def to_dict(self) -> dict[str, Any]:
        return {"policy": self.policy, "params": dict(self.params), "cost": self.cost,
                "ci_halfwidth": self.ci_halfwidth, "gap": self.gap, "optimum": self.optimum,
                **self.parts, "method": self.method, "criterion": self.criterion, "states": self.states,
                "seconds": self.seconds, "note": self.note, "clipped_orders": self.clipped_orders}


def _optimum_value(optimum: Any) -> float | None:
    """None, a finite number, or anything with a numeric `cost` (a SolveResult)."""
    if optimum is None:
        return None
    v = getattr(optimum, "cost", optimum)
    if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)) or not math.isfinite(float(v)):
        shown = repr(optimum) if len(repr(optimum)) <= 60 else repr(optimum)[:57] + "..."
        raise SpecError(f"optimum: must be None, a finite number or a solve result, got {shown}")
    return float(v)


def evaluate(spec: Any, policy: Any, *, method: str = "auto", optimum: Any = None, replications: int = 100,
             periods: int = 2000, warmup: int = 200, seed: int = 0, max_states: int = DEFAULT_MAX_STATES,
             progress: bool = False, max_period_steps: float = DEFAULT_MAX_PERIOD_STEPS,
             max_memory_mb: float = DEFAULT_MAX_MEMORY_MB, clip: bool = False) -> Evaluation:
    """Cost of `policy` (a Policy, or any callable obs batch -> orders) on `spec`.

    method: "exact", "simulate", or "auto" (exact, falling back to simulation when the policy's
    reachable state space is over `max_states` or it is unstable). `optimum`: a number or a
    SolveResult, for the gap. Every argument is checked before any work starts, the simulation
    budget (`max_period_steps`, `max_memory_mb`, see `simulate`) included. Orders that are not
    legal sizes are refused unless clip=True (then rounded down, counted in `clipped_orders`).
    """
    spec = load_spec(spec)
    if not isinstance(method, str) or method not in METHODS:
        raise SpecError(f"method: must be one of {', '.join(METHODS)}, got {method!r}")
    opt = _optimum_value(optimum)
    R, T, W, _ = check_run(replications, periods, warmup, seed)
    check_count("max_states", max_states)
    if method != "exact":
        check_simulation_budget(spec.state_dim, R, T if spec.discount < 1 else W + T,
                                check_limit("max_period_steps", max_period_steps),
                                check_limit("max_memory_mb", max_memory_mb))
    pol = as_policy(policy)
    name = pol.describe() if hasattr(pol, "describe") else type(pol).__name__
    params = pol.params() if hasattr(pol, "params") else {}
    note = ""
    if method in ("auto", "exact"):
        try:
            ex = evaluate_exact(spec, pol, max_states=max_states, clip=clip)
            return Evaluation(name, ex.cost, 0.0, dict(ex.parts), "exact", ex.criterion,
                              ex.seconds, opt, ex.states, "", params, ex.clipped_orders)
        except BudgetError as e:
            if method == "exact":
                raise
            note = f"simulated because {e}"
    sim = simulate(spec, pol, replications=replications, periods=periods, warmup=warmup, seed=seed,
                   progress=progress, max_period_steps=max_period_steps, max_memory_mb=max_memory_mb, clip=clip)
    return Evaluation(name, sim.cost, sim.ci_halfwidth, dict(sim.parts), "simulated",
                      sim.criterion, sim.seconds, opt, None, note, params, sim.clipped_orders)
