"""Backorders: the model definition (`model.py`), the lead-time cost G(y) and its env."""
from .model import BackorderModel

MODEL = BackorderModel()
