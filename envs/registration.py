"""Registers the invbench env ids with Gymnasium (done on `import invbench`)."""
from __future__ import annotations

import gymnasium as gym

ENV_IDS = {
    "invbench/LostSales-v0": ("invbench.envs.lost_sales:LostSalesEnv", "lost_sales"),
    "invbench/Backorder-v0": ("invbench.envs.backorder:BackorderEnv", "backorder"),
}


def _vector_entry(model: str):
    def make(num_envs: int = 1, **kwargs):
        from .vector_env import InventoryVectorEnv
        return InventoryVectorEnv(num_envs=num_envs, model=model, **kwargs)
    return make


def register_envs() -> None:
    for env_id, (entry, model) in ENV_IDS.items():
        if env_id in gym.registry:
            continue
        gym.register(id=env_id, entry_point=entry, vector_entry_point=_vector_entry(model),
                     disable_env_checker=False)
