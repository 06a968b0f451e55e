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
from gymnasium.vector import AutoresetMode, VectorEnv
from gymnasium.vector.utils import batch_space

from .actions import ActionCodec
from .inventory_env import DEFAULT_EPISODE_LENGTH, check_count, observation_space, resolve_spec
from .random_inputs import PeriodInputs


class InventoryVectorEnv(VectorEnv):
    """N copies of one inventory instance, stepped together. Actions are order-size indices."""

    metadata = {"autoreset_mode": AutoresetMode.SAME_STEP}

    def __init__(self, num_envs: int = 1, model: str = "lost_sales", spec: Any = None,
                 episode_length: int = DEFAULT_EPISODE_LENGTH, **overrides: Any) -> None:
        self.num_envs = check_count("num_envs", num_envs)
        self.episode_length = check_count("episode_length", episode_length)
        self.spec_ = resolve_spec(model, spec, **overrides)
        self._model = self.spec_.model_def
        self._codec = ActionCodec(self.spec_)
        self.order_sizes_units = self.spec_.order_sizes_units
        self.single_observation_space = observation_space(self.spec_)
        self.single_action_space = self._codec.space
        self.observation_space = batch_space(self.single_observation_space, self.num_envs)
        self.action_space = batch_space(self.single_action_space, self.num_envs)
        self._rng = np.random.default_rng()
        self._inputs = PeriodInputs(self.spec_)  # e.g. a random lead time's cut-off, own streams
        self._input_rngs = self._inputs.streams(None)
        self._state = self._model.start_state(self.spec_, self.num_envs)
        self._t = 0

    def reset(self, *, seed: int | None = None, options: dict | None = None) -> tuple[np.ndarray, dict]:
        if seed is not None:
            self._rng = np.random.default_rng(seed)
            self._input_rngs = self._inputs.streams(seed)
        self._state = self._model.start_state(self.spec_, self.num_envs)
        self._t = 0
        return self._state.astype(np.float32), {}

    def step(self, actions: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, dict]:
        order = self._codec.orders(actions, self.num_envs)
        demand = self.spec_.demand.sample(self._rng, self.num_envs)
        extra = self._inputs.draw(self._input_rngs, self.num_envs)
        self._state, parts = self._model.step(self.spec_, self._state, order, demand, **extra)
        self._t += 1
        cost = parts.total
        infos: dict[str, Any] = {"demand": demand, "order_units": order[:, 0] if order.shape[1] == 1 else order}
        infos.update({f"{k}_cost": v for k, v in parts.costs.items()})
        infos.update(parts.flows)
        done = self._t >= self.episode_length
        truncated = np.full(self.num_envs, done)
        obs = self._state.astype(np.float32)
        if done:
            infos["final_obs"] = obs
            obs, _ = self.reset()
        return obs, -cost.astype(np.float64), np.zeros(self.num_envs, dtype=bool), truncated, infos
