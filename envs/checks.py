"""Argument checks shared by the Python API and the CLI: one line naming the argument and the
allowed range, raised as SpecError, whatever was passed (strings, NaN, bools, None)."""
from __future__ import annotations

import math
from typing import Any, Iterable

import numpy as np

from .errors import SpecError


def range_text(lo: float | None, hi: float | None, lo_open: bool = False, hi_open: bool = False,
               integer: bool = False) -> str:
    kind = "an integer" if integer else "a number"
    if lo is not None and hi is not None:
        return f"{kind} in {'(' if lo_open else '['}{lo:g}, {hi:g}{')' if hi_open else ']'}"
    if lo is not None:
        return f"{kind} {'>' if lo_open else '>='} {lo:g}"
    if hi is not None:
        return f"{kind} {'<' if hi_open else '<='} {hi:g}"
    return kind


def check_number(name: str, v: Any, lo: float | None = None, hi: float | None = None, *,
                 lo_open: bool = False, hi_open: bool = False, integer: bool = False) -> float | int:
    """A finite number (an integer when asked) within the range, or SpecError."""
    rng = range_text(lo, hi, lo_open, hi_open, integer)
    if isinstance(v, (bool, np.bool_)) or not isinstance(v, (int, float, np.integer, np.floating)):
        raise SpecError(f"{name}: must be {rng}, got {v!r}")
    x = float(v)
    if not math.isfinite(x) or (integer and not x.is_integer()):
        raise SpecError(f"{name}: must be {rng}, got {v!r}")
    if lo is not None and (x <= lo if lo_open else x < lo):
        raise SpecError(f"{name}: must be {rng}, got {v!r}")
    if hi is not None and (x >= hi if hi_open else x > hi):
        raise SpecError(f"{name}: must be {rng}, got {v!r}")
    return int(x) if integer else x


def check_count(name: str, v: Any, lo: int = 1, hi: int | None = None) -> int:
    """An integer >= lo (floats holding a whole number are refused: counts are typed)."""
    if isinstance(v, (bool, np.bool_)) or not isinstance(v, (int, np.integer)):
        raise SpecError(f"{name}: must be {range_text(lo, hi, integer=True)}, got {v!r}")
    return int(check_number(name, v, lo, hi, integer=True))


def check_choice(name: str, v: Any, choices: Iterable[str]) -> str:
    choices = tuple(choices)
    if not isinstance(v, str) or v not in choices:
        raise SpecError(f"{name}: must be one of {', '.join(choices)}, got {v!r}")
    return v
