"""Command-line value checks shared by every command: numbers in their ranges, spec files, outputs.

Option types raise `argparse.ArgumentTypeError`, which the parser prints as one line naming the
option (`argument --periods: must be an integer >= 1, got 'x'`) and exit code 2; the file checks
raise SpecError. NaN and infinity are refused everywhere: a NaN cap would silently disable it.
"""
from __future__ import annotations

import argparse
import math
from pathlib import Path
from typing import Any, Callable

from invbench.envs.demand import DEFAULT_MAX_SUPPORT
from invbench.envs import paths
from invbench.envs.errors import SpecError


def _num(v: float) -> str:
    # An integer bound is printed whole: `:g` would round 2**32 - 1 to 4.29497e+09, which reads
    # as a different limit.
    return str(v) if isinstance(v, int) else f"{v:g}"


def _range(lo: float | None, hi: float | None, lo_open: bool = False, hi_open: bool = False) -> str:
    if lo is not None and hi is not None:
        return f"in {'(' if lo_open else '['}{_num(lo)}, {_num(hi)}{')' if hi_open else ']'}"
    if lo is not None:
        return f"{'>' if lo_open else '>='} {_num(lo)}"
    return "a number" if hi is None else f"<= {_num(hi)}"


def integer(lo: int, hi: int | None = None) -> Callable[[str], int]:
    """An integer option in [lo, hi]; `1e6` is read as 1000000, `1.5` and `nan` are refused."""
    rng = _range(lo, hi)

    def parse(text: str) -> int:
        try:
            v: Any = int(text)
        except ValueError:
            try:
                f = float(text)
            except ValueError:
                f = math.nan
            v = int(f) if math.isfinite(f) and f.is_integer() else None
        if v is None or v < lo or (hi is not None and v > hi):
            raise argparse.ArgumentTypeError(f"must be an integer {rng}, got {text!r}")
        return v
    parse.__name__ = "integer"
    return parse


def number(lo: float | None = None, hi: float | None = None, lo_open: bool = False,
           hi_open: bool = False) -> Callable[[str], float]:
    """A finite number option in its range (`lo_open`, `hi_open`: that end itself excluded)."""
    rng = _range(lo, hi, lo_open, hi_open)

    def parse(text: str) -> float:
        try:
            v = float(text)
        except ValueError:
            v = math.nan
        ok = math.isfinite(v) and (lo is None or (v > lo if lo_open else v >= lo)) and (hi is None or (v < hi if hi_open else v <= hi))
        if not ok:
            raise argparse.ArgumentTypeError(f"must be a finite number {rng}, got {text!r}")
        return v
    parse.__name__ = "number"
    return parse


def add_demand_limit(parser: argparse.ArgumentParser) -> None:
    """`--max-demand-support`: `invbench.cli.main` applies it around the whole command."""
    parser.add_argument("--max-demand-support", type=integer(1, 10**12), default=DEFAULT_MAX_SUPPORT, metavar="N",
                        help=f"refuse demand pmfs with more values (default {DEFAULT_MAX_SUPPORT:,})")


def check_spec_file(path: str | Path) -> Path:
    """An existing, readable UTF-8 file, else SpecError naming it (before the TOML is parsed)."""
    p = Path(path)
    try:
        if not p.is_file():
            raise SpecError(f"spec file: {str(p)!r} does not exist or is not a file")
        p.read_bytes().decode("utf-8")
    except UnicodeDecodeError as e:
        raise SpecError(f"spec file: {p} is not UTF-8 text (byte 0x{e.object[e.start]:02x} at offset {e.start}); "
                        "save it as UTF-8") from None
    except OSError as e:
        raise SpecError(f"spec file: {p} cannot be read ({e.strerror or e})") from None
    return p


def check_output_dir(path: str | Path, name: str = "--out") -> Path:
    """A directory that can be created or written (`envs/paths.py`), checked before any work."""
    return paths.check_output_dir(path, name)
