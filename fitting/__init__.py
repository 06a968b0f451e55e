"""From sales history to instance files: read daily sales with stock-outs, fit demand laws
(censored Poisson and negative binomial, Kaplan–Meier), choose one per item, write instances.
"""
from importlib import import_module
from typing import Any

# name -> submodule; loaded on first use so that `invbench --help` does not import pandas
_EXPORTS = {
    "FAMILIES": "estimators", "Fit": "estimators", "Sample": "estimators", "fit_poisson": "estimators",
    "fit_negative_binomial": "estimators", "fit_kaplan_meier": "estimators",
    "Columns": "reading", "ItemHistory": "reading", "SalesData": "reading", "read_sales": "reading",
    "ItemFit": "selection", "fit_item": "selection",
}

__all__ = sorted(_EXPORTS)


def __getattr__(name: str) -> Any:
    if name in _EXPORTS:
        return getattr(import_module(f"{__name__}.{_EXPORTS[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
