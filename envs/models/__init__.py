"""The registry of models: one folder per model, each exporting `MODEL`, an `InventoryModel`.

Registering a model here enrols it everywhere: spec validation, env ids, the exact solver, the
simulator, the agents and the conformance test (`tests/test_model_conformance.py`).
"""
from __future__ import annotations

from invbench.envs.errors import SpecError

from .backorder import MODEL as _BACKORDER
from .base import Field, InventoryModel, OrderSlot, Outcome
from .lost_sales import MODEL as _LOST_SALES
from .perishable import MODEL as _PERISHABLE

MODELS: dict[str, InventoryModel] = {m.name: m for m in (_LOST_SALES, _BACKORDER, _PERISHABLE)}


def get_model(name: str) -> InventoryModel:
    if not isinstance(name, str) or name not in MODELS:
        raise SpecError(f"instance.model: must be one of {', '.join(MODELS)}, got {name!r}")
    return MODELS[name]


__all__ = ["Field", "InventoryModel", "MODELS", "OrderSlot", "Outcome", "get_model"]
