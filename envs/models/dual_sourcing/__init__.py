"""Dual sourcing: the model definition (`model.py`), its exact space (`space.py`) and its env."""
from .model import DualSourcingModel

MODEL = DualSourcingModel()
