"""`ScaledEnv`: the scaling our `train` uses, as a Gymnasium wrapper for your own RL code.

`gymnasium.make("invbench/LostSales-v0", ...)` gives raw states (units, up to the 1e9 bound of
the observation space), minus the cost as reward, and every legal order size as an action;
RL libraries do not rescale these by themselves. Wrapped, the env shows what our agents see
(`agents/scaling.py`, the one place the scaling is derived from the instance):

* observations: `state / mean demand - 1`, clipped to +-`obs_clip` (10 by default);
* rewards: `-(cost - reference cost) / reference cost` (a crude order-up-to rule's cost);
* actions: index i orders the i-th size 0, q, 2q, ... up to a high demand quantile, and the
  order never lifts the inventory position above the instance's cap (one order slot) nor, with
  `position_floor` on (off by default; on in our DQN), leaves it below the backorder floor; with
  several slots, one index per slot into that slot's sizes (`MultiDiscrete`).

`info` keeps the wrapped env's entries: `info["cost"]` is the unscaled cost of the period and
`info["order_units"]` what was ordered, so averages of `info["cost"]` compare with `solve()`.
`policy(model)` turns a trained model (anything with SB3's `predict`) into a policy on raw
states, for `invbench.evaluate` and its gap to the optimum.
"""
from __future__ import annotations

from typing import Any, Callable, Mapping

import gymnasium as gym
import numpy as np
from gymnasium import spaces

from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec

from .scaling import Scaling, scaling_for
from .settings import CommonSettings, apply_overrides


#: the settings that shape the scaling (the rest of `[agent]` is about training)
SCALING_KEYS = ("obs_scale", "obs_clip", "reward_scale", "reward_offset", "max_order_units", "position_cap",
                "position_floor", "order_quantile")


def scaling_of(spec: InstanceSpec, settings: CommonSettings | Mapping[str, Any] | None = None) -> Scaling:
    """The scaling `invbench train` derives for `spec` (settings: the scaling keys of `[agent]`)."""
    if not isinstance(settings, CommonSettings):
        if settings is not None and not isinstance(settings, Mapping):
            raise SpecError("settings: must be a mapping of scaling settings (e.g. {'obs_clip': 5}) or None")
        other = sorted(set(settings or {}) - set(SCALING_KEYS))
        if other:
            raise SpecError(f"settings.{other[0]}: must be one of the scaling settings {', '.join(SCALING_KEYS)}")
        # validated as for DQN, the one agent of ours using every scaling key (position_floor);
        # the wrapper serves any algorithm, and the floor stays off unless asked for
        settings = apply_overrides(CommonSettings(), settings, "dqn")
    return scaling_for(spec, settings)


class ScaledEnv(gym.Wrapper, gym.utils.RecordConstructorArgs):
    """An invbench env with scaled observations and rewards and the agents' action sizes.

    env: an env made by `gymnasium.make("invbench/...")` (or a model's env class).
    settings: overrides of the scaling settings (`obs_scale`, `obs_clip`, `reward_scale`,
    `reward_offset`, `max_order_units`, `position_cap`, `position_floor`, `order_quantile`), as in
    `[agent]`.
    scaling: a `Scaling` to use as is (e.g. a saved learned policy's), instead of deriving one.
    """

    def __init__(self, env: gym.Env, settings: Mapping[str, Any] | None = None,
                 scaling: Scaling | None = None) -> None:
        # recorded so that gymnasium can re-make the wrapped env from `env.spec` (its checker does)
        gym.utils.RecordConstructorArgs.__init__(self, settings=settings, scaling=scaling)
        gym.Wrapper.__init__(self, env)
        spec = getattr(env.unwrapped, "spec_", None)
        if not isinstance(spec, InstanceSpec):
            raise SpecError(f"env: must be an invbench env (gymnasium.make of an invbench/... id), "
                            f"got {type(env.unwrapped).__name__}")
        self.instance = spec
        self.scaling = scaling if scaling is not None else scaling_of(spec, settings)
        sc = self.scaling
        legal = [np.asarray(slot.sizes_units, dtype=np.int64) for slot in spec.order_slots]
        if sc.n_slots != len(legal) or any(c > len(u) for c, u in zip(sc.slot_counts, legal)):
            raise SpecError("scaling: its order slots do not fit the env's instance")
        self._legal = legal[0]
        n = spec.state_dim
        if sc.obs_clip > 0:
            low, high = np.full(n, -sc.obs_clip), np.full(n, sc.obs_clip)
        else:  # the features of the wrapped space's bounds
            inner = env.observation_space
            low, high = sc.features(inner.low[None])[0], sc.features(inner.high[None])[0]
        self.observation_space = spaces.Box(low.astype(np.float32), high.astype(np.float32), (n,), np.float32)
        counts = sc.slot_counts
        self.action_space = spaces.Discrete(counts[0]) if sc.n_slots == 1 else spaces.MultiDiscrete(counts)
        self._raw = np.zeros((1, n), dtype=np.float32)

    @property
    def raw_state(self) -> np.ndarray:
        """The current state in units (what the wrapped env would have returned)."""
        return self._raw[0].copy()

    def reset(self, *, seed: int | None = None, options: dict | None = None) -> tuple[np.ndarray, dict]:
        raw, info = self.env.reset(seed=seed, options=options)
        self._raw = np.asarray(raw, dtype=np.float32).reshape(1, -1)
        return self.scaling.features(self._raw)[0], info

    def step(self, action: Any) -> tuple[np.ndarray, float, bool, bool, dict]:
        raw, _, terminated, truncated, info = self.env.step(self.inner_action(action))
        self._raw = np.asarray(raw, dtype=np.float32).reshape(1, -1)
        reward = float(self.scaling.reward(np.float64(info["cost"])))
        return self.scaling.features(self._raw)[0], reward, terminated, truncated, info

    def inner_action(self, action: Any) -> Any:
        """The wrapped env's action for this env's action in the current state."""
        sc = self.scaling
        if sc.n_slots > 1:  # a slot's sizes are a prefix of its legal sizes: same index
            a = np.asarray(action).reshape(-1)
            if a.size != sc.n_slots or not self.action_space.contains(a.astype(np.int64)):
                raise SpecError(f"action: must be {sc.n_slots} integers in "
                                f"{', '.join(f'[0, {c - 1}]' for c in sc.slot_counts)}, got {action!r}")
            return a.astype(np.int64)
        if not self.action_space.contains(np.int64(np.asarray(action).reshape(()))):
            raise SpecError(f"action: must be an integer in [0, {sc.n_actions - 1}], got {action!r}")
        units = sc.orders(self._raw, np.asarray(action, dtype=np.int64).reshape(1))
        return int(np.searchsorted(self._legal, int(units[0])))

    def policy(self, model: Any) -> Callable[[np.ndarray], np.ndarray]:
        """A policy on raw states (`act(states[B, n]) -> orders`) from a model trained on this env.

        model: anything with SB3's `predict(obs, deterministic=True)`; it acts greedily.
        """
        sc = self.scaling
        if not callable(getattr(model, "predict", None)):
            raise SpecError(f"model: must have a predict(obs, deterministic=True) method, got {type(model).__name__}")

        def act(states: np.ndarray) -> np.ndarray:
            states = np.asarray(states)
            index, _ = model.predict(sc.features(states), deterministic=True)
            return sc.orders(states, np.asarray(index, dtype=np.int64))
        return act

