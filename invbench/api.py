"""The public Python API in a few functions; `import invbench` re-exports them."""
from __future__ import annotations

from typing import Any

import gymnasium as gym

from invbench.baselines.exact import SolveResult, solve
from invbench.envs.spec import InstanceSpec, load_spec
from invbench.experiments.evaluate import Evaluation, evaluate

ENV_ID = {"lost_sales": "invbench/LostSales-v0", "backorder": "invbench/Backorder-v0"}


def make_env(spec: Any, **kwargs: Any) -> gym.Env:
    """The Gymnasium env of `spec` (InstanceSpec, dict or TOML path), via `gymnasium.make`."""
    s = load_spec(spec)
    return gym.make(ENV_ID[s.model], spec=s, **kwargs)


def policies() -> dict[str, str]:
    """Classical policy names with a one-line description each."""
    from invbench.baselines.policies.registry import policy_descriptions
    return policy_descriptions()


__all__ = ["Evaluation", "InstanceSpec", "SolveResult", "evaluate", "load_spec", "make_env", "policies", "solve"]
