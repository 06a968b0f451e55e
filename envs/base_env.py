"""Shared machinery of the inventory Gymnasium envs: spec handling, spaces, seeding, stepping.

Each model's env file only adds its docstring and its id; the physics is the model's step
function from `dynamics.py`, called with a batch of one.
"""
from __future__ import annotations

from typing import Any

import gymnasium as gym
import numpy as np
from gymnasium import spaces

from .dynamics import initial_state, step_fn
from .errors import SpecError
from .spec import InstanceSpec, load_spec, spec_from_dict

DEFAULT_EPISODE_LENGTH = 500
#: Observation bound: finite so checkers and scalers are happy, far beyond any real stock level.
OBS_LIMIT = 1e9


def resolve_spec(model: str, spec: Any = None, **overrides: Any) -> InstanceSpec:
    """A spec from `spec` (InstanceSpec, dict or TOML path) with keyword overrides applied on top."""
    if spec is None:
        base: dict[str, Any] = {"model": model, "demand": {"distribution": "poisson", "mean": 5.0}}
    else:
        base = load_spec(spec).to_dict()
    base.update(overrides)
    base.setdefault("model", model)
    out = spec_from_dict(base)
    if out.model != model:
        raise SpecError(f"instance.model: this env is for {model!r}, got {out.model!r}")
    return out


class InventoryEnv(gym.Env):
    """Base class; see `LostSalesEnv` and `BackorderEnv` for the documented interface."""

    metadata = {"render_modes": ["ansi"], "render_fps": 4}
    model: str = ""

    def __init__(self, spec: Any = None, episode_length: int = DEFAULT_EPISODE_LENGTH,
                 start_state: Any = None, render_mode: str | None = None, **overrides: Any) -> None:
        self.spec_ = resolve_spec(self.model, spec, **overrides)
        if isinstance(episode_length, bool) or not isinstance(episode_length, (int, np.integer)) or episode_length < 1:
            raise SpecError(f"episode_length: must be an integer >= 1, got {episode_length!r}")
        self.episode_length = int(episode_length)
        self.render_mode = render_mode
        self._step = step_fn(self.spec_)
        self._order_sizes = self.spec_.order_sizes_units
        n = self.spec_.state_dim
        self._start = self._check_start(start_state, n)
        self.action_space = spaces.Discrete(len(self._order_sizes))
        low = np.zeros(n, dtype=np.float32)
        if self.model == "backorder":
            low[0] = -OBS_LIMIT
        self.observation_space = spaces.Box(low=low, high=np.full(n, OBS_LIMIT, dtype=np.float32),
                                            shape=(n,), dtype=np.float32)
        self._state = initial_state(self.spec_)
        self._t = 0

    def _check_start(self, start: Any, n: int) -> np.ndarray:
        if start is None:
            return initial_state(self.spec_)
        arr = np.asarray(start, dtype=np.int64).reshape(1, -1)
        if arr.shape[1] != n:
            raise SpecError(f"start_state: must have {n} entries (state length for L={self.spec_.lead_time}), got {arr.shape[1]}")
        lo = 1 if self.model == "backorder" else 0
        if np.any(arr[0, lo:] < 0):
            raise SpecError("start_state: stock and pipeline entries must be >= 0")
        return arr

    @property
    def order_sizes_units(self) -> np.ndarray:
        """Units ordered by each action index."""
        return self._order_sizes

    def reset(self, *, seed: int | None = None, options: dict | None = None) -> tuple[np.ndarray, dict]:
        super().reset(seed=seed)
        self._state = self._start.copy()
        self._t = 0
        return self._obs(), {}

    def step(self, action: Any) -> tuple[np.ndarray, float, bool, bool, dict]:
        a = int(np.asarray(action).item())
        if not 0 <= a < len(self._order_sizes):
            raise SpecError(f"action: must be an integer in [0, {len(self._order_sizes) - 1}], got {a}")
        order = self._order_sizes[a:a + 1]
        demand = self.spec_.demand.sample(self.np_random, 1)
        self._state, parts = self._step(self._state, order, demand)
        self._t += 1
        cost = float(parts.total[0])
        info = {
            "order_units": int(order[0]), "demand": int(demand[0]), "sales": int(parts.sales[0]),
            self._shortfall_key: int(parts.shortfall[0]),
            "holding_cost": float(parts.holding[0]), "shortage_cost": float(parts.shortage[0]),
            "ordering_cost": float(parts.ordering[0]), "cost": cost,
        }
        truncated = self._t >= self.episode_length
        return self._obs(), -cost, False, truncated, info

    @property
    def _shortfall_key(self) -> str:
        return "lost" if self.model == "lost_sales" else "backordered"

    def _obs(self) -> np.ndarray:
        return self._state[0].astype(np.float32)

    def render(self) -> str | None:
        if self.render_mode == "ansi":
            s = self._state[0]
            return f"t={self._t} level={s[0]} pipeline={list(map(int, s[1:]))}"
        return None
