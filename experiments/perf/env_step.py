"""Benchmark: Gymnasium env steps per second against a minimal pure-Python env of the same model.

Lost sales, L = 4, h = 1, p = 9, Poisson demand with mean 5, base-stock 31 chosen in plain
Python; one core, measured side by side in one run, each through `gymnasium.make` (with its
wrappers) and unwrapped. The minimal env below is the yardstick only: twenty lines of Python
numbers, no checks, no named cost parts (it is not the project's env). Prints both rates and
their ratio (target: ours >= 0.5 x the minimal env).
"""
from __future__ import annotations

import sys
import time
from bisect import bisect_right
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from _common import classic_spec, machine  # noqa: E402

import gymnasium as gym  # noqa: E402
import numpy as np  # noqa: E402

STEPS = 50_000
LEVEL = 31
MINIMAL_ID = "perf/MinimalLostSales-v0"


class MinimalLostSales(gym.Env):
    """Lost sales on a list [on-hand, pipeline...]: the smallest env of the model we could write."""

    def __init__(self, lead_time: int = 4, h: float = 1.0, p: float = 9.0, cdf: list | None = None) -> None:
        self.L, self.h, self.p, self.cdf = lead_time, h, p, cdf or [1.0]
        self.observation_space = gym.spaces.Box(0.0, 1e9, (lead_time,), np.float32)
        self.action_space = gym.spaces.Discrete(100)
        self.s = [0] * lead_time

    def reset(self, *, seed=None, options=None):
        super().reset(seed=seed)
        self.s = [0] * self.L
        return np.array(self.s, dtype=np.float32), {}

    def step(self, action):
        s, d = self.s, min(bisect_right(self.cdf, self.np_random.random()), len(self.cdf) - 1)
        sold = min(s[0], d)
        end = s[0] - sold
        self.s = [end + s[1]] + s[2:] + [int(action)]
        cost = self.h * end + self.p * (d - sold)
        return np.array(self.s, dtype=np.float32), -cost, False, False, {"cost": cost}


def rate(env: gym.Env, steps: int) -> float:
    obs, _ = env.reset(seed=0)
    t0 = time.process_time()
    for _ in range(steps):
        a = max(LEVEL - int(obs.sum()), 0)  # base-stock on the inventory position
        obs, *_ = env.step(a)
    return steps / (time.process_time() - t0)


def main() -> None:
    spec = classic_spec(4, 9)
    cdf = spec.demand.pmf().cdf().tolist()
    gym.register(MINIMAL_ID, entry_point=MinimalLostSales, kwargs={"cdf": cdf})
    envs = {
        "invbench env, gymnasium.make": gym.make("invbench/LostSales-v0", spec=spec, episode_length=10 * STEPS),
        "minimal env, gymnasium.make": gym.make(MINIMAL_ID),
    }
    envs["invbench env, unwrapped"] = envs["invbench env, gymnasium.make"].unwrapped
    envs["minimal env, unwrapped"] = envs["minimal env, gymnasium.make"].unwrapped
    for env in envs.values():
        rate(env, 2000)  # warm-up (compiles or loads the compiled step)
    print(f"machine: {machine()}")
    best: dict[str, float] = {}
    for _ in range(3):  # interleaved rounds, best of three, so load from others hits both alike
        for name, env in envs.items():
            best[name] = max(best.get(name, 0.0), rate(env, STEPS))
    for name, v in best.items():
        print(f"{name:<32} {v:>10,.0f} steps/s")
    for how in ("gymnasium.make", "unwrapped"):
        r = best[f"invbench env, {how}"] / best[f"minimal env, {how}"]
        print(f"ratio invbench / minimal env ({how}): {r:.2f} (target >= 0.5)")


if __name__ == "__main__":
    main()
