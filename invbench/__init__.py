"""invbench: inventory-control environments, certified exact optima and policy evaluation.

    import invbench
    spec = invbench.load_spec("instance.toml")
    opt = invbench.solve(spec)
    ev = invbench.evaluate(spec, my_policy, optimum=opt)
"""
from invbench.envs import Demand, InstanceSpec, SpecError, load_spec
from invbench.envs.registration import register_envs

register_envs()

from invbench.api import Evaluation, SolveResult, evaluate, make_env, policies, solve  # noqa: E402

__version__ = "0.1.0"

__all__ = ["Demand", "Evaluation", "InstanceSpec", "SolveResult", "SpecError", "evaluate", "load_spec",
           "make_env", "policies", "solve", "__version__"]
