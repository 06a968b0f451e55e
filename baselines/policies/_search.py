"""Parameter search for policies whose cost has no formula: every candidate is scored by exact
evaluation (`invbench.baselines.policy_eval.evaluate_exact`), results are cached, and a local
pattern search on an integer grid keeps the number of evaluations small. An instance that has
no exact face (lead times that may cross) is scored by simulation instead, every candidate
on the same random numbers (`SEARCH_SIMULATION`), so that their differences are not noise.
"""
from __future__ import annotations

import itertools
import math
from typing import Any, Callable, Sequence

from tqdm.auto import tqdm

from invbench.envs.errors import BudgetError
from invbench.envs.spec import InstanceSpec

from ._common import Optimum

Point = tuple[int, ...]

#: Simulation used to score candidates on simulated-only instances: one seed for all (common
#: random numbers); a few seconds per candidate at most.
SEARCH_SIMULATION = {"replications": 40, "periods": 2000, "warmup": 200, "seed": 12345}


class ExactScorer:
    """Cached long-run average cost of `build(point)`; a policy whose reachable state space
    is too large for the evaluator (typically an unstable one) scores +inf."""

    def __init__(self, spec: InstanceSpec, build: Callable[[Point], Any], *, progress: bool = False,
                 desc: str = "search", max_states: int | None = None,
                 evaluate: Callable[[InstanceSpec, Any, int | None], Any] | None = None) -> None:
        # Searches target the long-run average cost, whatever discount the spec carries.
        self.spec = spec if spec.discount >= 1 else spec.with_(discount=1.0)
        self.build = build
        self.max_states = max_states
        self._evaluate = evaluate or _plain_exact
        self.cache: dict[Point, float] = {}
        self.results: dict[Point, Any] = {}
        self.failures: dict[Point, str] = {}
        self.evaluations = 0
        self._bar = tqdm(desc=desc, unit="eval", disable=not progress, leave=False)

    def seed(self, point: Point, result: Any) -> None:
        """Record a result found elsewhere (e.g. by the plain base-stock search)."""
        self.cache[point] = float(result.cost)
        self.results[point] = result

    def __call__(self, point: Point) -> float:
        point = tuple(int(v) for v in point)
        if point in self.cache:
            return self.cache[point]
        try:
            res = self._evaluate(self.spec, self.build(point), self.max_states)
            cost = float(res.cost)
            self.results[point] = res
        except BudgetError as e:
            cost = math.inf
            self.failures[point] = str(e)
        self.evaluations += 1
        self.cache[point] = cost
        best = min(self.cache.values())
        self._bar.update(1)
        self._bar.set_postfix_str(f"best {best:.4f}" if math.isfinite(best) else "best -")
        return cost

    def best_point(self) -> Point:
        """The cheapest point scored so far (each is an exact evaluation of a real policy)."""
        return min(self.cache, key=lambda p: self.cache[p])

    def close(self) -> None:
        self._bar.close()

    def optimum(self, point: Point, note: str = "", **extra: Any) -> Optimum:
        res = self.results.get(tuple(point))
        if res is None:
            reason = self.failures.get(tuple(point), "no candidate could be evaluated")
            raise BudgetError(f"policy search: no candidate with a finite evaluated cost ({reason})")
        method = "simulation_search" if getattr(res, "method", "") == "simulated" else "exact_search"
        return Optimum(method=method, cost=float(res.cost), parts=dict(res.parts),
                       evaluations=self.evaluations, note=note, extra=extra)


def _plain_exact(spec: InstanceSpec, policy: Any, max_states: int | None) -> Any:
    if spec.model_def.simulation_only(spec):
        from invbench.experiments.simulate import simulate
        return simulate(spec, policy, **SEARCH_SIMULATION)
    from invbench.baselines.policy_eval import evaluate_exact  # heavy; only when searching

    kw = {} if max_states is None else {"max_states": max_states}
    return evaluate_exact(spec, policy, **kw)


def pattern_search(f: Callable[[Point], float], start: Sequence[int], steps: Sequence[int],
                   clamp: Callable[[Point], Point], patience: int = 0) -> tuple[Point, float]:
    """Local minimum of `f` on an integer grid, from `start`.

    Moves along each axis while the cost falls (line search), then tries the diagonal moves,
    and halves the step sizes when nothing improves; stops at step 1 with no improving move.
    This finds the global minimum when f is unimodal along the searched directions; for the
    policy costs here that is the usual working assumption, not a theorem (common practice).
    `clamp` maps a point into the feasible set. With `patience` p > 0 a line search looks up
    to p points past one that does not improve, to cross flat stretches of a cost that is
    piecewise constant in the parameter.
    """
    x = clamp(tuple(int(v) for v in start))
    fx = f(x)
    steps = [max(1, int(s)) for s in steps]
    n = len(x)
    axes = [tuple(sg if j == i else 0 for j in range(n)) for i in range(n) for sg in (1, -1)]
    diagonals = [d for d in itertools.product((-1, 0, 1), repeat=n) if sum(map(abs, d)) > 1]

    def better(a: float, b: float) -> bool:
        return a < b - 1e-12 * max(1.0, abs(b)) if math.isfinite(b) else math.isfinite(a)

    while True:
        improved = False
        for dirs in (axes, diagonals):
            for d in dirs:
                while True:  # keep going in a direction that pays
                    y, found = x, None
                    for _ in range(patience + 1):
                        nxt = clamp(tuple(y[i] + d[i] * steps[i] for i in range(n)))
                        if nxt == y:
                            break
                        y = nxt
                        fy = f(y)
                        if better(fy, fx):
                            found = (y, fy)
                            break
                    if found is None:
                        break
                    (x, fx), improved = found, True
            if improved:
                break
        if not improved:
            if all(s == 1 for s in steps):
                return x, fx
            steps = [max(1, s // 2) for s in steps]
