"""Benchmark: period-steps per second of the batch simulator against a straightforward numpy
batch loop of the same model and policy, for every model; and against the env in a Python loop.

The straightforward loop is what one writes first: per period the policy's `act` on the whole
batch, the demand by inverse CDF of R uniforms, the model's numpy `step`, the costs added up.
The simulator runs the same numbers through its compiled paths (`experiments/sim_kernels.py`).
For lost sales a hand-written twenty-line numpy loop of the model is timed too (the yardstick
of the performance issue). One core, CPU time of this process, measured side by side in one
run, best of five interleaved rounds. Targets: simulator >= 3 x the straightforward loop for every model,
and >= 100 x the env loop.
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from _common import classic_spec, machine  # noqa: E402

import gymnasium as gym  # noqa: E402
import numpy as np  # noqa: E402

from invbench.baselines.policies.registry import make_policy  # noqa: E402
from invbench.envs.models import MODELS, compiled  # noqa: E402
from invbench.envs.spec import spec_from_dict  # noqa: E402
from invbench.experiments.simulate import simulate  # noqa: E402

REPS, PERIODS = 1000, 500
ROUNDS = 5

#: (label, spec, policy name, params): one instance per model, a policy the compiled path runs
CASES = [
    ("lost_sales L=4 p=9, base-stock 31", classic_spec(4, 9), "base_stock", {"S": 31}),
    ("backorder L=2, K=5, (s, S) = (8, 20)", spec_from_dict({"model": "backorder", "lead_time": 2,
     "fixed_order_cost": 5.0, "demand": {"distribution": "poisson", "mean": 4.0}}), "s_S", {"s": 8, "S": 20}),
    ("perishable m=3 L=1 FIFO, base-stock 9", spec_from_dict({"model": "perishable", "lead_time": 1, "shelf_life": 3,
     "outdating_cost": 3.0, "demand": {"distribution": "poisson", "mean": 3.0}}), "base_stock", {"S": 9}),
    ("dual_sourcing lr=3 le=1, dual index", spec_from_dict({"model": "dual_sourcing", "lead_time": 3,
     "expedited_lead_time": 1, "shortage_cost": 19.0, "expedited_unit_cost": 2.0,
     "demand": {"distribution": "poisson", "mean": 3.0}}), "dual_index", {"S_e": 6, "S_r": 14}),
    ("serial 3 stages L=(1,1,2), echelon", spec_from_dict({"model": "serial", "lead_times": [1, 1, 2],
     "holding_costs": [3.0, 2.0, 1.0], "demand": {"distribution": "poisson", "mean": 3.0}}),
     "echelon_base_stock", {"s": [6, 11, 19]}),
]


def straightforward(spec, policy, reps: int, periods: int) -> float:
    """The numpy batch loop of the module doc; returns the mean cost (to check it is the same run)."""
    model, rng = spec.model_def, np.random.default_rng(0)
    state = model.start_state(spec, reps)
    total = np.zeros(reps)
    for _ in range(periods):
        orders = policy.act(state)
        demand = spec.demand.from_uniforms(rng.random(reps))
        state, out = model.step(spec, state, orders, demand)
        total += out.total
    return float(total.mean() / periods)


def handwritten_lost_sales(spec, S: int, reps: int, periods: int) -> float:
    """Lost sales with base-stock S in plain numpy, the rules written out (yardstick only)."""
    rng, cdf, L = np.random.default_rng(0), spec.demand.pmf().cdf(), spec.lead_time
    on_hand, pipe = np.zeros(reps, dtype=np.int64), np.zeros((reps, L - 1), dtype=np.int64)
    total = np.zeros(reps)
    for _ in range(periods):
        order = np.maximum(S - on_hand - pipe.sum(axis=1), 0)
        demand = np.minimum(np.searchsorted(cdf, rng.random(reps), side="right"), len(cdf) - 1)
        sold = np.minimum(on_hand, demand)
        end = on_hand - sold
        total += spec.holding_cost * end + spec.shortage_cost * (demand - sold)
        on_hand = end + pipe[:, 0]
        pipe = np.column_stack([pipe[:, 1:], order])
    return float(total.mean() / periods)


def timed(fn, *args) -> tuple[float, float]:
    t0 = time.process_time()
    out = fn(*args)
    return time.process_time() - t0, out


def sim(spec, policy, reps: int, periods: int) -> float:
    return simulate(spec, policy, replications=reps, periods=periods, warmup=0, seed=0).cost


def env_loop(spec, S: int, steps: int) -> float:
    env = gym.make("invbench/LostSales-v0", spec=spec, episode_length=steps + 1).unwrapped
    obs, _ = env.reset(seed=0)
    t0 = time.process_time()
    for _ in range(steps):
        obs, *_ = env.step(max(S - int(obs.sum()), 0))
    return steps / (time.process_time() - t0)


def main() -> None:
    print(f"machine: {machine()}")
    print(f"{REPS:,} replications x {PERIODS} periods; million period-steps per CPU second (best of {ROUNDS})")
    print(f"{'instance':<40} {'numpy loop':>10} {'simulator':>10} {'ratio':>6} {'sim, no compiled':>17}")
    n = REPS * PERIODS
    for case, (label, spec, pname, params) in enumerate(CASES):
        pol = make_policy(spec, pname, params)
        sim(spec, pol, 10, 10)  # compiles, or loads the compiled kernels from numba's cache
        best = {"loop": 1e9, "sim": 1e9, "plain": 1e9, "hand": 1e9}
        for _ in range(ROUNDS):  # interleaved rounds: load from other work hits every contender alike
            t, c_loop = timed(straightforward, spec, pol, REPS, PERIODS)
            best["loop"] = min(best["loop"], t)
            t, c_sim = timed(sim, spec, pol, REPS, PERIODS)
            best["sim"] = min(best["sim"], t)
            with compiled.enabled(False):
                t, _ = timed(sim, spec, pol, REPS, PERIODS)
            best["plain"] = min(best["plain"], t)
            if case == 0:
                t, c_hand = timed(handwritten_lost_sales, spec, params["S"], REPS, PERIODS)
                best["hand"] = min(best["hand"], t)
        assert abs(c_loop - c_sim) <= 1e-9, (label, c_loop, c_sim)  # the same run, the same cost
        print(f"{label:<40} {n / best['loop'] / 1e6:>10.2f} {n / best['sim'] / 1e6:>10.2f} "
              f"{best['loop'] / best['sim']:>5.1f}x {n / best['plain'] / 1e6:>17.2f}")
        if case == 0:
            assert abs(c_hand - c_sim) <= 1e-9, (c_hand, c_sim)
            hand = best["hand"], best["sim"]
    print(f"lost sales, hand-written numpy loop: {n / hand[0] / 1e6:.2f} M/s; simulator / it: {hand[0] / hand[1]:.1f}x")
    spec = CASES[0][1]
    big = min(timed(sim, spec, make_policy(spec, "base_stock", {"S": 31}), 10_000, 200)[0] for _ in range(3))
    rate = env_loop(spec, 31, 20_000)
    print(f"lost sales, 10,000 replications x 200: {2e6 / big / 1e6:.2f} M/s; env loop (unwrapped, "
          f"compiled step): {rate:,.0f} steps/s; simulator / env loop: {2e6 / big / rate:,.0f}x (target >= 100)")
    for name in MODELS:
        assert any(s.model == name for _, s, _, _ in CASES), name  # every registered model is measured


if __name__ == "__main__":
    main()
