"""Inventory models (one folder each under `models/`), demand, instance specs, the generic
Gymnasium env and batch vector env, and env registration."""
from .demand import DISTRIBUTIONS, Demand, DiscretePmf, poisson
from .dynamics import initial_state, step_fn
from .errors import BudgetError, SpecError
from .models import MODELS, InventoryModel, Outcome, get_model
from .spec import InstanceSpec, load_spec, spec_from_dict

__all__ = [
    "DISTRIBUTIONS", "Demand", "DiscretePmf", "poisson", "Outcome", "initial_state", "step_fn",
    "BudgetError", "SpecError", "InstanceSpec", "MODELS", "InventoryModel", "get_model",
    "load_spec", "spec_from_dict",
]
