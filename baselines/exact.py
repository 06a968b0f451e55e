"""Exact optimum of an instance: build the finite MDP, iterate to certified bounds, verify bounds.

`solve(spec)` returns a SolveResult whose `lower <= optimum <= upper` gap is below `rel_tol`
(relative) for the average cost; the policy is a TablePolicy usable as any other policy.
"""
from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.sparse.csgraph import breadth_first_order

from invbench.envs.errors import BudgetError, SimulationOnly, SpecError
from invbench.envs.models.exact_space import Bounds, ExactSpace
from invbench.envs.spec import InstanceSpec, load_spec

from invbench.envs.checks import check_choice, check_number
from .iteration import (IterationOutcome, discounted_policy_iteration, discounted_value_iteration,
                        relative_value_iteration)
from .mdp import FiniteMDP, build_mdp, check_budget
from .table_policy import TablePolicy

DEFAULT_MAX_STATES = 3_000_000
DEFAULT_MAX_MEMORY_MB = 4096
MAX_WIDENINGS = 12
METHODS = ("auto", "rvi", "lp", "value_iteration", "policy_iteration")


@dataclass
class SolveResult:
    cost: float
    lower: float
    upper: float
    policy: TablePolicy
    iterations: int
    seconds: float
    states: int
    pairs: int
    truncation_mass: float
    method: str
    criterion: str  # "average" or "discounted"
    representation: str
    bounds: Bounds
    widenings: int
    converged: bool
    notes: list[str] = field(default_factory=list)
    mdp: FiniteMDP | None = field(default=None, repr=False)
    values: np.ndarray | None = field(default=None, repr=False)
    choice: np.ndarray | None = field(default=None, repr=False)  # chosen pair per state

    @property
    def gap(self) -> float:
        """Certified relative gap between the bounds."""
        return (self.upper - self.lower) / max(abs(self.lower), 1e-12)

    def to_dict(self) -> dict[str, Any]:
        return {
            "cost": self.cost, "lower": self.lower, "upper": self.upper, "certified_gap": self.gap,
            "iterations": self.iterations, "seconds": self.seconds, "states": self.states,
            "pairs": self.pairs, "truncation_mass": self.truncation_mass, "method": self.method,
            "criterion": self.criterion, "representation": self.representation,
            "bounds": self.bounds.to_dict(),
            "widenings": self.widenings, "converged": self.converged, "notes": list(self.notes),
        }


def reachable_states(mdp: FiniteMDP, choice: np.ndarray) -> np.ndarray:
    """States reachable from the start state when the pairs `choice` are used."""
    if hasattr(mdp, "reachable"):  # a matrix-free MDP (`split_mdp.py`) finds them itself
        return mdp.reachable(choice)
    P = mdp.P[choice]
    return np.sort(breadth_first_order(P, mdp.start, directed=True, return_predecessors=False))


def _run(mdp: FiniteMDP, spec: InstanceSpec, method: str, rel_tol: float, on_iter: Any) -> IterationOutcome:
    if spec.discount < 1.0:
        if method == "policy_iteration":
            return discounted_policy_iteration(mdp, spec.discount)
        return discounted_value_iteration(mdp, spec.discount, rel_tol, on_iter=on_iter)
    if method == "lp":
        from .lp import solve_average_lp
        return solve_average_lp(mdp)
    return relative_value_iteration(mdp, rel_tol, on_iter=on_iter)


#: RVI's iteration limit (`iteration.relative_value_iteration`).
RVI_MAX_ITER = 100_000


def expected_iterations(spec: InstanceSpec) -> float:
    """Rough RVI iteration count, from how long one order lasts.

    When orders come in large batches (a case pack or fixed cost many times the mean demand),
    the chain cycles slowly and the span bounds close in about 2 (cycle / mean demand)^2
    iterations (measured: backorders, Poisson 3, packs of 30, 100, 300 took 198, 2,187 and
    19,680 iterations).
    """
    from invbench.envs.models.exact_space import eoq_room
    mean = max(spec.demand.mean, 1e-12)
    cycle = max(spec.case_pack, eoq_room(spec), 1)
    return max(200.0, 2.0 * (cycle / mean) ** 2)


def exact_space(spec: InstanceSpec, full_pipeline: bool = False) -> ExactSpace:
    """The model's exact space (for backorders, optionally the full pipeline state)."""
    model = spec.model_def
    if full_pipeline:
        import inspect
        if "full_pipeline" not in inspect.signature(model.exact_space).parameters:
            raise SpecError(f"full_pipeline: the {spec.model} model has no reduced state to check "
                            "(only a model solved on a reduced state, e.g. backorders, offers it)")
        return model.exact_space(spec, full_pipeline=True)  # type: ignore[call-arg]
    return model.exact_space(spec)


def solve(spec: Any, *, rel_tol: float = 1e-6, method: str = "auto", max_states: int = DEFAULT_MAX_STATES,
          max_memory_mb: float = DEFAULT_MAX_MEMORY_MB, full_pipeline: bool = False,
          bounds: Bounds | None = None, fast: bool = True, progress: bool = False) -> SolveResult:
    """Certified optimum of `spec` (InstanceSpec, dict or TOML path).

    method: "auto" (RVI for average cost, value iteration when discounted), "rvi", "lp"
    (HiGHS, tiny instances), "value_iteration" or "policy_iteration" (discounted only).
    full_pipeline: for backorders, solve on the full pipeline state instead of the inventory
    position (for checking that reduction; far larger).
    fast: where the model's exact space declares a demand split (`demand_split()`: lost sales,
    backorders, dual sourcing with fixed lead times), RVI / value iteration run without a
    transition matrix (`split_mdp.py`, `split_solve.py`); otherwise the model's structured build
    where it has one. Same numbers, much quicker and smaller. False uses the straightforward
    build, stepping every (state, order, demand).
    A model whose exact space offers `certified_solve` (an exact method of its own, e.g. the
    serial chain's decomposition) is solved by it when method is "auto", no bounds are given
    and fast is True; any other choice builds and solves the MDP.
    """
    spec = load_spec(spec)
    check_choice("method", method, METHODS)
    rel_tol = check_number("rel_tol", rel_tol, 0.0, 1.0, lo_open=True, hi_open=True)
    max_states = int(check_number("max_states", max_states, 1, None, integer=True))
    max_memory_mb = check_number("max_memory_mb", max_memory_mb, 0.0, None, lo_open=True)
    if spec.discount < 1 and method in ("rvi", "lp"):
        raise SpecError(f"method: {method} is for the average-cost criterion (discount = 1)")
    if spec.discount == 1 and method in ("value_iteration", "policy_iteration"):
        raise SpecError(f"method: {method} is for the discounted criterion (discount < 1)")
    reason = spec.model_def.simulation_only(spec)
    if reason:
        raise SimulationOnly(f"exact solve: {reason}")
    if spec.discount == 1 and method in ("auto", "rvi") and expected_iterations(spec) > RVI_MAX_ITER:
        from invbench.envs.models.exact_space import eoq_room
        cycle = max(spec.case_pack, eoq_room(spec), 1)
        raise BudgetError(
            f"exact solve: with mean demand {spec.demand.mean:g} per period an order of {cycle:,} units (the "
            f"case pack or the fixed cost's batch) lasts about {cycle / max(spec.demand.mean, 1e-12):,.0f} periods; "
            f"relative value iteration would need about {expected_iterations(spec):,.0f} iterations, over its "
            f"limit of {RVI_MAX_ITER:,} (use simulation, or a smaller case pack or fixed cost)")
    t0 = time.perf_counter()
    space = exact_space(spec, full_pipeline)
    # A model whose exact space has a certified method of its own (the serial chain's Clark-Scarf
    # decomposition) is solved by it unless the caller asked for the MDP (a method or bounds).
    own = getattr(space, "certified_solve", None)
    if own is not None and method == "auto" and bounds is None and fast:
        return own(progress=progress)
    b = bounds or space.initial_bounds()
    notes: list[str] = []
    total_iter = 0
    bar = None
    # a space that declares how demand enters its step is iterated without a transition matrix
    split = space.demand_split() if fast and method in ("auto", "rvi", "value_iteration") else None
    if split is not None:  # imported here: the compiled loops load numba, which `import invbench` need not
        from .split_mdp import build_split_mdp, split_estimate
        from .split_solve import run_split
    for widen in range(MAX_WIDENINGS + 1):
        est = space.estimate(b) if split is None else split_estimate(space, b)
        check_budget(est, max_states, int(max_memory_mb * 2**20))
        mdp = out = None  # free the narrower bounds' arrays before building the wider ones
        if split is not None:
            mdp = build_split_mdp(space, split, b)
        else:
            mdp = (space.fast_build(b) if fast else None) or build_mdp(space, b)
        on_iter = None
        if progress:
            from tqdm import tqdm
            bar = tqdm(desc=f"solve ({mdp.n_states:,} states)", unit="it", leave=False)

            def on_iter(it: int, lo: float, hi: float, _bar: Any = bar) -> None:
                _bar.update(1)
                if it % 10 == 0:
                    _bar.set_postfix(gap=f"{(hi - lo) / max(abs(lo), 1e-12):.1e}")
        out = (_run(mdp, spec, method, rel_tol, on_iter) if split is None
               else run_split(mdp, spec.discount, rel_tol, on_iter))
        if bar is not None:
            bar.close()
        total_iter += out.iterations
        up, down = space.binding(mdp, out.choice[reachable_states(mdp, out.choice)])
        if not (up or down):
            break
        b = space.widen(b, up, down)
    else:
        notes.append(f"state-space bounds still bind after {MAX_WIDENINGS} widenings; optimum may be cut off")
    actions = mdp.pair_action[out.choice]
    if not out.converged:
        notes.append("iteration limit reached before the bounds met the tolerance")
    reach = reachable_states(mdp, out.choice)
    caps = np.array([s.cap_units for s in spec.order_slots])
    if np.any(actions[reach] == caps[None, :]):
        notes.append(f"an order cap ({', '.join(map(str, caps))} units) is reached in reachable states")
    policy = TablePolicy(spec, space, mdp.index, actions, b)
    used = method if method != "auto" else ("rvi" if spec.discount == 1 else "value_iteration")
    return SolveResult(out.value, out.lower, out.upper, policy, total_iter, time.perf_counter() - t0,
                       mdp.n_states, mdp.n_pairs, mdp.truncation_mass, used,
                       "average" if spec.discount == 1 else "discounted", mdp.representation, b, widen,
                       out.converged, notes, mdp, out.h, out.choice)
