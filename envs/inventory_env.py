"""The one Gymnasium env for every model: spec handling, spaces, seeding, stepping.

Each model's env class (in its folder) only adds its docstring; the physics is the model's
step function, called with a batch of one. `actions.py` turns Gymnasium actions into orders.
"""
from __future__ import annotations

from typing import Any

import gymnasium as gym
import numpy as np

from .actions import ActionCodec
from .checks import check_count
from .errors import SpecError
from .random_inputs import PeriodInputs
from .row_step import RowStep
from .spec import InstanceSpec, load_spec, spec_from_dict

DEFAULT_EPISODE_LENGTH = 500
#: Observation bound: finite so checkers and scalers are happy, far beyond any real stock level.
OBS_LIMIT = 1e9


def resolve_spec(env_model: str, spec: Any = None, **overrides: Any) -> InstanceSpec:
    """A spec from `spec` (InstanceSpec, dict or TOML path) with keyword overrides applied on top."""
    model = env_model
    if spec is None:
        base: dict[str, Any] = {"model": model, "demand": {"distribution": "poisson", "mean": 5.0}}
    else:
        base = load_spec(spec).to_dict()
    base.update(overrides)
    base.setdefault("model", model)
    if base["model"] != model:
        raise SpecError(f"instance.model: this env is for {model!r}, got {base['model']!r} "
                        "(use that model's env id)")
    return spec_from_dict(base)


def observation_space(spec: InstanceSpec) -> gym.spaces.Box:
    low = np.maximum(spec.model_def.state_low(spec), -OBS_LIMIT).astype(np.float32)
    n = len(low)
    return gym.spaces.Box(low=low, high=np.full(n, OBS_LIMIT, dtype=np.float32), shape=(n,), dtype=np.float32)


def check_start(spec: InstanceSpec, start: Any) -> np.ndarray:
    """A start state [1, n] checked against the model's layout."""
    model = spec.model_def
    if start is None:
        return model.start_state(spec)
    try:
        arr = np.asarray(start, dtype=np.float64).reshape(1, -1)
    except (TypeError, ValueError):
        raise SpecError(f"start_state: must be a list of {spec.state_dim} integers, got {start!r}") from None
    n = spec.state_dim
    if arr.shape[1] != n:
        raise SpecError(f"start_state: must have {n} entries ({'; '.join(model.state_labels(spec))}), "
                        f"got {arr.shape[1]}")
    if not np.all(np.isfinite(arr)) or np.any(arr != np.rint(arr)) or np.any(np.abs(arr) > OBS_LIMIT):
        raise SpecError(f"start_state: entries must be whole numbers within +-{OBS_LIMIT:g}, got {start!r}")
    if np.any(arr[0] < model.state_low(spec)):
        raise SpecError(f"start_state: entries must be >= {list(model.state_low(spec))}, got {start!r}")
    return arr.astype(np.int64)


def info_dict(spec: InstanceSpec, order: np.ndarray, demand: np.ndarray, parts: Any, row: int) -> dict[str, Any]:
    """The named cost parts and flows of one row, as plain Python numbers."""
    info: dict[str, Any] = {"order_units": order[row].tolist() if order.ndim > 1 and order.shape[1] > 1
                            else int(order.reshape(len(order), -1)[row, 0]),
                            "demand": int(demand[row])}
    for k, v in parts.flows.items():
        info[k] = int(v[row])
    for k, v in parts.costs.items():
        info[f"{k}_cost"] = float(v[row])
    info["cost"] = float(parts.total[row])
    return info


class InventoryEnv(gym.Env):
    """Base class; each model's env (e.g. `LostSalesEnv`) documents the interface."""

    metadata = {"render_modes": ["ansi"], "render_fps": 4}
    model: str = ""

    def __init__(self, spec: Any = None, episode_length: int = DEFAULT_EPISODE_LENGTH,
                 start_state: Any = None, render_mode: str | None = None, **overrides: Any) -> None:
        self.spec_ = resolve_spec(self.model, spec, **overrides)
        self.episode_length = check_count("episode_length", episode_length)
        if render_mode not in (None, "ansi"):
            raise SpecError(f"render_mode: must be None or 'ansi', got {render_mode!r}")
        self.render_mode = render_mode
        self._model = self.spec_.model_def
        self._codec = ActionCodec(self.spec_)
        self._start = check_start(self.spec_, start_state)
        self.action_space = self._codec.space
        self.observation_space = observation_space(self.spec_)
        self._state = self._start.copy()
        self._t = 0
        # other random inputs (a random lead time's cut-off): own streams, so demand is the same
        self._inputs = PeriodInputs(self.spec_)
        self._input_rngs = self._inputs.streams(None)
        self._fast = RowStep.for_spec(self.spec_)

    @property
    def order_sizes_units(self) -> np.ndarray:
        """Units ordered by each action index (first order slot)."""
        return self.spec_.order_sizes_units

    def reset(self, *, seed: int | None = None, options: dict | None = None) -> tuple[np.ndarray, dict]:
        super().reset(seed=seed)
        if seed is not None:
            self._input_rngs = self._inputs.streams(seed)
        self._state = self._start.copy()
        self._t = 0
        return self._obs(), {}

    def step(self, action: Any) -> tuple[np.ndarray, float, bool, bool, dict]:
        # the compiled one-row step when the model's rules cover the instance (same numbers)
        done = self._fast.step(self._state, action, self.np_random) if self._fast is not None else None
        self._state, info = done if done is not None else self._step_numpy(action)
        self._t += 1
        truncated = self._t >= self.episode_length
        return self._obs(), -info["cost"], False, truncated, info

    def _step_numpy(self, action: Any) -> tuple[np.ndarray, dict]:
        order = self._codec.orders(action, 1)
        demand = self.spec_.demand.sample(self.np_random, 1)
        extra = self._inputs.draw(self._input_rngs, 1)
        state, parts = self._model.step(self.spec_, self._state, order, demand, **extra)
        return state, info_dict(self.spec_, order, demand, parts, 0)

    def _obs(self) -> np.ndarray:
        return self._state[0].astype(np.float32)

    def render(self) -> str | None:
        if self.render_mode == "ansi":
            labels = self._model.state_labels(self.spec_)
            return f"t={self._t} " + ", ".join(f"{lab}={int(v)}" for lab, v in zip(labels, self._state[0]))
        return None
