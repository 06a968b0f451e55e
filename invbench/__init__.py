"""invbench: inventory-control environments, certified exact optima and policy evaluation.

    import invbench
    spec = invbench.load_spec("instance.toml")
    opt = invbench.solve(spec)
    ev = invbench.evaluate(spec, my_policy, optimum=opt)
    run = invbench.train(spec, agent="ppo", steps=100_000, seed=0, out="runs/ppo")
    invbench.save_policy(invbench.make_policy("base_stock", spec), "policies/bs")
    pol = invbench.load_policy("policies/bs", spec)      # any saved policy: table, classical, learned
"""
from typing import Any

from invbench.envs import Demand, InstanceSpec, SpecError, load_spec
from invbench.envs.registration import register_envs

register_envs()

from invbench.api import (Evaluation, SolveResult, evaluate, export_table, load_policy, make_env,  # noqa: E402
                          make_policy, policies, save_policy, solve)

__version__ = "0.1.0"

__all__ = ["Demand", "Evaluation", "InstanceSpec", "SolveResult", "SpecError", "evaluate", "export_table",
           "load_policy", "load_spec", "make_env", "make_policy", "policies", "save_policy", "solve", "train", "ScaledEnv",
           "__version__"]


def __getattr__(name: str) -> Any:
    # Training needs torch; load it only when asked, so `import invbench` stays light.
    if name in ("train", "ScaledEnv"):
        import invbench.agents as agents
        return getattr(agents, name)
    raise AttributeError(f"module 'invbench' has no attribute {name!r}")
