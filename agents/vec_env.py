"""The batch simulator as a stable-baselines3 `VecEnv`: hundreds of copies per vectorised call.

It adapts `invbench.envs.vector_env.InventoryVectorEnv` (which calls the model's one step
function) and only adds SB3's conventions: scaled observations and rewards, `dones` plus
`terminal_observation` / `TimeLimit.truncated` at the time limit, and `episode` statistics.
With `scaling=None` it passes raw states and minus the cost, which is what the equivalence
check against the single env uses. A model with several order slots gets a `MultiDiscrete`
action space, one index per slot into that slot's sizes (as the Gymnasium env does).
"""
from __future__ import annotations

import time
from typing import Any, Sequence

import numpy as np
from gymnasium import spaces
from stable_baselines3.common.vec_env import VecEnv

from invbench.envs.inventory_env import OBS_LIMIT
from invbench.envs.spec import InstanceSpec
from invbench.envs.vector_env import InventoryVectorEnv

from .scaling import Scaling


class InventorySB3VecEnv(VecEnv):
    """`num_envs` copies of one instance; action i orders the i-th legal size (per slot)."""

    def __init__(self, spec: InstanceSpec, num_envs: int, scaling: Scaling | None = None,
                 episode_length: int = 500, seed: int | None = None) -> None:
        self.inner = InventoryVectorEnv(num_envs=num_envs, model=spec.model, spec=spec,
                                        episode_length=episode_length)
        self.spec_ = self.inner.spec_
        self.scaling = scaling
        n = self.spec_.state_dim
        legal = [len(slot.sizes_units) for slot in self.spec_.order_slots]
        if scaling is None:
            obs_space = self.inner.single_observation_space
            counts = legal
        else:
            bound = OBS_LIMIT / scaling.obs_scale
            obs_space = spaces.Box(-bound, bound, (n,), np.float32)
            counts = scaling.slot_counts
            if len(counts) != len(legal) or any(c > m for c, m in zip(counts, legal)):
                raise ValueError("scaling: more actions than the instance's legal orders")
        self.k = len(counts)
        action_space = spaces.Discrete(counts[0]) if self.k == 1 else spaces.MultiDiscrete(counts)
        # the scaling's sizes of a slot are a prefix of its legal sizes: same index, same units
        self._nvec = np.asarray(counts, dtype=np.int64)
        self._pending: np.ndarray | None = None
        self._raw = np.zeros((num_envs, n), dtype=np.float32)
        self._ep_reward = np.zeros(num_envs)
        self._ep_cost = np.zeros(num_envs)
        self._ep_len = 0
        self._t0 = time.perf_counter()
        super().__init__(num_envs, obs_space, action_space)
        if seed is not None:
            self.seed(seed)

    # ------------------------------------------------------------------ conversions
    def _obs(self, raw: np.ndarray) -> np.ndarray:
        return raw.astype(np.float32) if self.scaling is None else self.scaling.features(raw)

    def _reward(self, cost: np.ndarray) -> np.ndarray:
        r = -cost if self.scaling is None else self.scaling.reward(cost)
        return r.astype(np.float32)

    # ------------------------------------------------------------------ VecEnv API
    def reset(self) -> np.ndarray:
        seed = self._seeds[0]
        raw, _ = self.inner.reset(seed=seed)
        self._raw = raw
        self._reset_seeds()
        self._ep_reward[:] = 0.0
        self._ep_cost[:] = 0.0
        self._ep_len = 0
        self.reset_infos = [{} for _ in range(self.num_envs)]
        return self._obs(raw)

    def step_async(self, actions: np.ndarray) -> None:
        shape = (self.num_envs,) if self.k == 1 else (self.num_envs, self.k)
        self._pending = np.asarray(actions, dtype=np.int64).reshape(shape)

    def step_wait(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[dict[str, Any]]]:
        actions, self._pending = self._pending, None
        if actions is None:
            raise RuntimeError("step_wait called without step_async")
        if actions.min() < 0 or np.any(actions.reshape(self.num_envs, self.k) >= self._nvec):
            raise ValueError(f"actions: must be integers in {', '.join(f'[0, {c - 1}]' for c in self._nvec)}")
        if self.scaling is not None and (self.scaling.position_cap > 0 or self.scaling.position_floor is not None):
            # the cap and the floor are part of the action's meaning: same rule as LearnedPolicy.act
            actions = self.scaling.orders(self._raw, actions) // self.scaling.case_pack
        raw, neg_cost, terminated, truncated, info = self.inner.step(actions)
        self._raw = raw
        cost = -np.asarray(neg_cost, dtype=np.float64)
        reward = self._reward(cost)
        self._ep_reward += reward
        self._ep_cost += cost
        self._ep_len += 1
        dones = np.logical_or(terminated, truncated)
        infos: list[dict[str, Any]] = [{} for _ in range(self.num_envs)]
        if dones.any():
            final = self._obs(info["final_obs"])
            elapsed = round(time.perf_counter() - self._t0, 6)
            for i in np.flatnonzero(dones):
                infos[i] = {"terminal_observation": final[i], "TimeLimit.truncated": bool(truncated[i] and not terminated[i]),
                            "episode": {"r": float(self._ep_reward[i]), "l": self._ep_len, "t": elapsed,
                                        "cost_per_period": float(self._ep_cost[i] / self._ep_len)}}
            self._ep_reward[dones] = 0.0
            self._ep_cost[dones] = 0.0
            if dones.all():
                self._ep_len = 0
        return self._obs(raw), reward, dones, infos

    def close(self) -> None:
        self.inner.close()

    def get_attr(self, attr_name: str, indices: Any = None) -> list[Any]:
        idx = self._get_indices(indices)
        if attr_name == "render_mode":
            return [None for _ in idx]
        value = getattr(self.inner, attr_name)
        return [value for _ in idx]

    def set_attr(self, attr_name: str, value: Any, indices: Any = None) -> None:
        setattr(self.inner, attr_name, value)

    def env_method(self, method_name: str, *method_args: Any, indices: Any = None, **method_kwargs: Any) -> list[Any]:
        fn = getattr(self.inner, method_name)
        return [fn(*method_args, **method_kwargs) for _ in self._get_indices(indices)]

    def env_is_wrapped(self, wrapper_class: type, indices: Any = None) -> list[bool]:
        return [False for _ in self._get_indices(indices)]

    def _get_indices(self, indices: Any) -> Sequence[int]:
        if indices is None:
            return range(self.num_envs)
        if isinstance(indices, int):
            return [indices]
        return indices
