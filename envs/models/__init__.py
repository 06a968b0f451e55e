"""The registry of models: one folder per model, each exporting `MODEL`, an `InventoryModel`.

Registering a model here enrols it everywhere: spec validation, env ids, the exact solver, the
simulator, the agents and the conformance test (`tests/test_model_conformance.py`).
"""
from __future__ import annotations

from invbench.envs.errors import SpecError

from .backorder import MODEL as _BACKORDER
from .base import Field, InventoryModel, OrderSlot, Outcome
from .dual_sourcing import MODEL as _DUAL_SOURCING
from .lost_sales import MODEL as _LOST_SALES
from .perishable import MODEL as _PERISHABLE
from .serial import MODEL as _SERIAL

MODELS: dict[str, InventoryModel] = {m.name: m for m in (_LOST_SALES, _BACKORDER, _PERISHABLE,
                                                        _DUAL_SOURCING, _SERIAL)}


def _union(lists: list[tuple[str, ...]]) -> tuple[str, ...]:
    out: list[str] = []
    for xs in lists:
        out += [x for x in xs if x not in out]
    return tuple(out)


#: Every named cost part and every model-specific spec key, in registry order: the results
#: table has one column for each, so it never needs to know which model a row holds.
COST_PARTS: tuple[str, ...] = _union([m.cost_parts for m in MODELS.values()])
MODEL_KEYS: tuple[str, ...] = _union([tuple(m.fields) for m in MODELS.values()])


def get_model(name: str) -> InventoryModel:
    if not isinstance(name, str) or name not in MODELS:
        raise SpecError(f"instance.model: must be one of {', '.join(MODELS)}, got {name!r}")
    return MODELS[name]


__all__ = ["COST_PARTS", "Field", "InventoryModel", "MODELS", "MODEL_KEYS", "OrderSlot", "Outcome", "get_model"]
