"""Serial supply chain: the model (`model.py`), its exact space for brute-force checks
(`space.py`) and its env; the Clark-Scarf optimum is in `invbench.baselines.clark_scarf`."""
from .model import SerialModel

MODEL = SerialModel()
