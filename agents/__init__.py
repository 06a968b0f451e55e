"""RL agents trained on the CPU: SB3 adapters, our rollout agent, callbacks, safe policy export.

Imports are lazy so that `import invbench` and the command line stay light; torch and
stable-baselines3 load only when an agent is trained or a policy is loaded.
"""
from __future__ import annotations

from typing import Any

__all__ = ["train", "load_policy", "TrainResult", "LearnedPolicy", "compare_with_optimal", "AGENTS", "ScaledEnv"]

_WHERE = {"train": "training", "TrainResult": "training", "AGENTS": "training", "load_policy": "export",
          "LearnedPolicy": "learned_policy", "compare_with_optimal": "compare", "ScaledEnv": "wrapper"}


def __getattr__(name: str) -> Any:
    if name in _WHERE:
        import importlib
        return getattr(importlib.import_module(f"{__name__}.{_WHERE[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
