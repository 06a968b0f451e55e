"""Perishable goods: the model definition (`model.py`) and its env."""
from .model import PerishableModel

MODEL = PerishableModel()
