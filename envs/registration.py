"""Registers one env id per registered model with Gymnasium (done on `import invbench`).

The batch simulator is each id's `vector_entry_point`, so `gymnasium.make_vec(id, num_envs=N,
vectorization_mode="vector_entry_point")` steps all copies in one call of the model's step.
"""
from __future__ import annotations

from typing import Any, Callable

import gymnasium as gym

from .models import MODELS


def _vector_entry(model: str) -> Callable[..., Any]:
    def make(num_envs: int = 1, **kwargs: Any) -> Any:
        from .vector_env import InventoryVectorEnv
        return InventoryVectorEnv(num_envs=num_envs, model=model, **kwargs)
    return make


def env_ids() -> dict[str, str]:
    """model name -> env id."""
    return {name: m.env_id for name, m in MODELS.items()}


def register_envs() -> None:
    for name, m in MODELS.items():
        if m.env_id in gym.registry:
            continue
        gym.register(id=m.env_id, entry_point=m.env_entry, vector_entry_point=_vector_entry(name),
                     disable_env_checker=False)
