"""Benchmark: period-steps per second of the Gymnasium env in a Python loop vs the batch simulator.

Same model (lost sales, L = 4, classic costs), same base-stock policy, one core, measured side
by side in one run. Prints both rates and their ratio (target: batch >= 100 x env loop).
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from _common import classic_spec, machine  # noqa: E402

import gymnasium as gym  # noqa: E402
import numpy as np  # noqa: E402

from invbench.experiments.simulate import simulate  # noqa: E402


class BaseStock:
    def __init__(self, S: int) -> None:
        self.S = S

    def act(self, obs: np.ndarray) -> np.ndarray:
        return np.maximum(self.S - obs.sum(axis=1), 0).astype(np.int64)


def env_loop(spec, policy, steps: int, wrapped: bool) -> float:
    env = gym.make("invbench/LostSales-v0", spec=spec, episode_length=steps + 1)
    if not wrapped:
        env = env.unwrapped
    sizes = env.unwrapped.order_sizes_units
    q = spec.case_pack
    obs, _ = env.reset(seed=0)
    t0 = time.perf_counter()
    for _ in range(steps):
        order = int(policy.act(obs[None, :])[0])
        a = min(order // q, len(sizes) - 1)
        obs, *_ = env.step(a)
    return steps / (time.perf_counter() - t0)


def batch(spec, policy, reps: int, periods: int) -> float:
    t0 = time.perf_counter()
    simulate(spec, policy, replications=reps, periods=periods, warmup=0, seed=0)
    return reps * periods / (time.perf_counter() - t0)


def main() -> None:
    spec = classic_spec(4, 9)
    policy = BaseStock(31)
    env_loop(spec, policy, 500, True)  # warm-up
    print(f"machine: {machine()}")
    rates = {
        "env loop (gymnasium.make, wrappers)": env_loop(spec, policy, 20_000, True),
        "env loop (unwrapped env)": env_loop(spec, policy, 20_000, False),
        "batch simulator, 1,000 reps": batch(spec, policy, 1000, 500),
        "batch simulator, 10,000 reps": batch(spec, policy, 10_000, 200),
    }
    for k, v in rates.items():
        print(f"{k:<40} {v:>14,.0f} period-steps/s")
    base = rates["env loop (unwrapped env)"]
    best = max(rates["batch simulator, 1,000 reps"], rates["batch simulator, 10,000 reps"])
    print(f"ratio batch / unwrapped env loop: {best / base:,.0f} x (target >= 100)")
    print(f"ratio batch / wrapped env loop:   {best / rates['env loop (gymnasium.make, wrappers)']:,.0f} x")


if __name__ == "__main__":
    main()
