"""Shared helpers of the bench tests: small cheap cell functions and a suite writer.

The cell functions are real measurements (they run the model's own step function through a
tiny base-stock policy), cheap enough to fill a grid of cells in seconds. Other bench tests
and the subprocesses / Ray workers they start import this module as `tests.test_bench_helpers`
(the repo root on PYTHONPATH, see `subprocess_env`).
The one test here checks the simulator helper against the newsvendor formula.
"""
from __future__ import annotations

import math
import time
from pathlib import Path
from typing import Any

import numpy as np
import tomli_w
from scipy import stats

from invbench.baselines.policy import legal_orders
from invbench.envs.dynamics import initial_state, step_fn
from invbench.envs.spec import InstanceSpec, spec_from_dict

REPO_ROOT = Path(__file__).resolve().parent.parent


class TinyBaseStock:
    """Order up to S on the inventory position (stock plus pipeline)."""

    name = "tiny_base_stock"

    def __init__(self, spec: InstanceSpec, S: int) -> None:
        self.spec, self.S = spec, int(S)

    def act(self, obs: np.ndarray) -> np.ndarray:
        pos = np.asarray(obs, dtype=np.int64).sum(axis=1)
        return legal_orders(self.spec, np.maximum(self.S - pos, 0))

    def params(self) -> dict[str, Any]:
        return {"S": self.S}


def simulate(spec: InstanceSpec, policy: Any, seed: int, reps: int, periods: int, warmup: int) -> tuple[float, float]:
    """Mean cost per period after warm-up and its 95% CI half-width over replications."""
    step = step_fn(spec)
    rng = np.random.default_rng(seed)
    state = initial_state(spec, reps)
    total = np.zeros(reps)
    for t in range(periods):
        demand = spec.demand.sample(rng, reps)
        state, parts = step(state, policy.act(state), demand)
        if t >= warmup:
            total += parts.total
    per = total / (periods - warmup)
    return float(per.mean()), float(1.96 * per.std(ddof=1) / math.sqrt(reps))


def sim_base_stock(spec: InstanceSpec, params: dict[str, Any], seed: int, evaluation: dict[str, Any]) -> dict[str, Any]:
    """Custom cell: a given order-up-to level S, simulated. `pause` (s) paces the kill test.

    Like a training cell it opens a (disabled) tqdm bar first: tqdm then holds a lock that a
    worker killed mid-cell must not leave behind as a "leaked semaphore" warning.
    """
    from tqdm import tqdm

    tqdm(total=1, disable=True).close()
    time.sleep(float(params.get("pause", 0.0)))
    pol = TinyBaseStock(spec, params["S"])
    cost, ci = simulate(spec, pol, seed, params.get("reps", 20), params.get("periods", 300), 50)
    return {"cost": cost, "ci_halfwidth": ci, "method": "simulated", "params": {"S": pol.S}}


def search_base_stock(spec: InstanceSpec, params: dict[str, Any], seed: int, evaluation: dict[str, Any]) -> dict[str, Any]:
    """Custom cell that 'learns': tries S = 0, 1, ... with common random numbers, keeps the best.

    Its learning curve (best cost so far vs periods simulated) and its policy map give the
    report something real to draw without training a network.
    """
    from invbench.experiments.cell import policy_map

    reps, periods = 20, 300
    mean, sd = spec.demand.mean, math.sqrt(spec.demand.var)
    top = int(math.ceil(mean * (spec.lead_time + 1) + 3 * sd * math.sqrt(spec.lead_time + 1)))
    best, curve, used = None, [], 0
    for S in range(top + 1):
        cost, ci = simulate(spec, TinyBaseStock(spec, S), seed, reps, periods, 50)
        used += reps * periods
        if best is None or cost < best[1]:
            best = (S, cost, ci)
        curve.append({"step": float(used), "cost": best[1], "gap": None})
    S, cost, ci = best
    return {"cost": cost, "ci_halfwidth": ci, "method": "simulated", "params": {"S": S},
            "learning_curve": curve, "policy_map": policy_map(spec, TinyBaseStock(spec, S))}


def broken_cell(spec: InstanceSpec, params: dict[str, Any], seed: int, evaluation: dict[str, Any]) -> dict[str, Any]:
    """Custom cell that fails while running (a failure only the run can reveal)."""
    raise RuntimeError(f"measurement broke on {spec.label}")


def instance(name: str, model: str = "backorder", L: int = 1, mean: float = 3.0, p: float = 9.0) -> dict[str, Any]:
    return {"name": name, "model": model, "lead_time": L, "holding_cost": 1.0, "shortage_cost": p,
            "demand": {"distribution": "poisson", "mean": mean}}


def write_suite(path: Path, instances: list[dict[str, Any]], policies: list[dict[str, Any]],
                seeds: list[int] | None = None, name: str = "t", **head: Any) -> Path:
    data = {"suite": {"name": name, "seeds": seeds or [0], **head}, "instances": instances, "policies": policies}
    path.write_text(tomli_w.dumps(data))
    return path


def sim_policy(label: str, S: int, **extra: Any) -> dict[str, Any]:
    return {"function": "tests.test_bench_helpers:sim_base_stock", "label": label, "params": {"S": S, **extra}}


def search_policy(label: str = "search") -> dict[str, Any]:
    return {"function": "tests.test_bench_helpers:search_base_stock", "label": label}


def subprocess_env() -> dict[str, str]:
    """Environment for child processes: the repo root importable, one BLAS thread."""
    import os

    env = dict(os.environ)
    env["PYTHONPATH"] = str(REPO_ROOT) + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    env["OMP_NUM_THREADS"] = "1"
    return env


def test_sim_base_stock_matches_newsvendor_cost():
    # Backorders, L = 0, order-up-to S: each period's cost is the newsvendor cost
    # E[h (S - D)^+ + p (D - S)^+] (common practice: the one-period newsvendor), with the
    # expectation taken from scipy.stats.poisson, outside the project.
    spec = spec_from_dict(instance("nv", L=0, mean=4.0, p=9.0))
    S = 6
    d = np.arange(0, 60)
    pmf = stats.poisson(4.0).pmf(d)
    expected = float(np.sum(pmf * (1.0 * np.maximum(S - d, 0) + 9.0 * np.maximum(d - S, 0))))
    got = sim_base_stock(spec, {"S": S, "reps": 200, "periods": 1000}, seed=1, evaluation={})
    assert abs(got["cost"] - expected) <= 2 * got["ci_halfwidth"] + 1e-9, (got, expected)
