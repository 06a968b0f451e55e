"""Many items in one command: a portfolio of instances (an items CSV or the output of `invbench
fit`) run like a benchmark suite, with the best policy per item, a summary that stays short for
thousands of items, and a robustness report (regret when the demand law is not the fitted one).
"""
from importlib import import_module
from typing import Any

# name -> submodule; loaded on first use so that `invbench --help` stays light
_EXPORTS = {
    "PortfolioItem": "items", "read_portfolio": "items", "ITEM_COLUMNS": "items",
    "Alternative": "alternatives", "alternatives_for": "alternatives",
    "PortfolioResult": "run", "run_portfolio": "run",
}

__all__ = sorted(_EXPORTS)


def __getattr__(name: str) -> Any:
    if name in _EXPORTS:
        return getattr(import_module(f"{__name__}.{_EXPORTS[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
