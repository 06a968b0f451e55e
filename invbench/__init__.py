"""invbench: inventory-control environments, certified exact optima and policy evaluation."""
from invbench.envs import Demand, InstanceSpec, SpecError, load_spec
from invbench.envs.registration import register_envs

register_envs()

__version__ = "0.1.0"

__all__ = ["Demand", "InstanceSpec", "SpecError", "load_spec", "__version__"]
