"""Inventory models: demand, instance specs, the step functions and the Gymnasium envs."""
from .demand import DISTRIBUTIONS, Demand, DiscretePmf, poisson
from .dynamics import StepParts, backorder_step, initial_state, lost_sales_step, step_fn
from .errors import BudgetError, SpecError
from .spec import InstanceSpec, load_spec, spec_from_dict

__all__ = [
    "DISTRIBUTIONS", "Demand", "DiscretePmf", "poisson", "StepParts", "backorder_step",
    "initial_state", "lost_sales_step", "step_fn", "BudgetError", "SpecError", "InstanceSpec",
    "load_spec", "spec_from_dict",
]
