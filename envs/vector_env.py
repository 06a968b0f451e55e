"""The batch simulator exposed as a native Gymnasium `VectorEnv`.

All copies are stepped by one call of the model's step function, so the cost of a step is a
handful of numpy operations however many copies there are. Registered as the
`vector_entry_point` of each env id. Episodes of all copies have the same length, so they end
together; the returned observation after a truncation is already the reset one (same-step
autoreset) and `infos["final_obs"]` holds the last state.
"""
from __future__ import annotations

from typing import Any

import numpy as np
from gymnasium import spaces
from gymnasium.vector import AutoresetMode, VectorEnv
from gymnasium.vector.utils import batch_space

from .base_env import DEFAULT_EPISODE_LENGTH, OBS_LIMIT, resolve_spec
from .dynamics import initial_state, step_fn
from .errors import SpecError


class InventoryVectorEnv(VectorEnv):
    """N copies of one inventory instance, stepped together. Actions are order-size indices."""

    metadata = {"autoreset_mode": AutoresetMode.SAME_STEP}

    def __init__(self, num_envs: int = 1, model: str = "lost_sales", spec: Any = None,
                 episode_length: int = DEFAULT_EPISODE_LENGTH, **overrides: Any) -> None:
        if isinstance(num_envs, bool) or not isinstance(num_envs, (int, np.integer)) or num_envs < 1:
            raise SpecError(f"num_envs: must be an integer >= 1, got {num_envs!r}")
        if isinstance(episode_length, bool) or not isinstance(episode_length, (int, np.integer)) or episode_length < 1:
            raise SpecError(f"episode_length: must be an integer >= 1, got {episode_length!r}")
        self.spec_ = resolve_spec(model, spec, **overrides)
        self.num_envs = int(num_envs)
        self.episode_length = int(episode_length)
        self._step = step_fn(self.spec_)
        self.order_sizes_units = self.spec_.order_sizes_units
        n = self.spec_.state_dim
        low = np.zeros(n, dtype=np.float32)
        if self.spec_.model == "backorder":
            low[0] = -OBS_LIMIT
        self.single_observation_space = spaces.Box(low, np.full(n, OBS_LIMIT, dtype=np.float32), (n,), np.float32)
        self.single_action_space = spaces.Discrete(len(self.order_sizes_units))
        self.observation_space = batch_space(self.single_observation_space, self.num_envs)
        self.action_space = batch_space(self.single_action_space, self.num_envs)
        self._rng = np.random.default_rng()
        self._state = initial_state(self.spec_, self.num_envs)
        self._t = 0

    def reset(self, *, seed: int | None = None, options: dict | None = None) -> tuple[np.ndarray, dict]:
        if seed is not None:
            self._rng = np.random.default_rng(seed)
        self._state = initial_state(self.spec_, self.num_envs)
        self._t = 0
        return self._state.astype(np.float32), {}

    def step(self, actions: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, dict]:
        a = np.asarray(actions, dtype=np.int64).reshape(self.num_envs)
        if a.min() < 0 or a.max() >= len(self.order_sizes_units):
            raise SpecError(f"actions: must be integers in [0, {len(self.order_sizes_units) - 1}]")
        order = self.order_sizes_units[a]
        demand = self.spec_.demand.sample(self._rng, self.num_envs)
        self._state, parts = self._step(self._state, order, demand)
        self._t += 1
        cost = parts.total
        infos: dict[str, Any] = {"demand": demand, "order_units": order, "holding_cost": parts.holding,
                                 "shortage_cost": parts.shortage, "ordering_cost": parts.ordering}
        done = self._t >= self.episode_length
        truncated = np.full(self.num_envs, done)
        obs = self._state.astype(np.float32)
        if done:
            infos["final_obs"] = obs
            obs, _ = self.reset()
        return obs, -cost.astype(np.float64), np.zeros(self.num_envs, dtype=bool), truncated, infos
