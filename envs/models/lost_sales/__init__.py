"""Lost sales: the model definition (`model.py`), its structured MDP build and its env."""
from .model import LostSalesModel

MODEL = LostSalesModel()
