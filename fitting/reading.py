"""Reading and validating a sales-history CSV (date, item, units, stock-out flag).

Every problem in the file becomes one SpecError line that names the column (and the line of the
file) and states what is allowed; nothing here fits or writes anything.
"""
from __future__ import annotations

import io
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from invbench.envs.errors import SpecError

#: Largest daily sales accepted by default: the demand pmf is an array of this length.
DEFAULT_MAX_UNITS = 100_000


@dataclass(frozen=True)
class Columns:
    """Column names of the sales file; `stockout` is None when the file has no stock-out flag."""

    date: str = "date"
    item: str = "item"
    units: str = "units"
    stockout: str | None = "stockout"


@dataclass
class ItemHistory:
    """One item's daily sales; `censored[i]` is True on days when stock ran out (sales <= demand)."""

    name: str
    dates: np.ndarray
    units: np.ndarray
    censored: np.ndarray
    missing_days: int = 0

    @property
    def days(self) -> int:
        return len(self.units)

    def to_dict(self) -> dict[str, Any]:
        return {"item": self.name, "days": self.days, "censored_days": int(self.censored.sum()),
                "missing_days": self.missing_days}


@dataclass
class SalesData:
    """All items of a sales file, in order of first appearance, plus notes about the file."""

    items: list[ItemHistory]
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        return {"items": [h.to_dict() for h in self.items], "notes": list(self.notes)}


def read_text_file(path: str | Path, what: str) -> str:
    """The file's text, refusing missing, binary and non-UTF-8 files with one line."""
    p = Path(path)
    if not p.is_file():
        raise SpecError(f"{what}: {str(p)!r} does not exist or is not a file")
    try:
        raw = p.read_bytes()
    except OSError as e:
        raise SpecError(f"{what}: cannot read {str(p)!r} ({e.strerror})") from None
    if b"\x00" in raw:
        raise SpecError(f"{what}: {str(p)!r} is a binary file, expected a UTF-8 text CSV file")
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as e:
        raise SpecError(f"{what}: {str(p)!r} is not UTF-8 text (bad byte at offset {e.start}); "
                        "save it as UTF-8 CSV") from None


def read_csv_table(path: str | Path, what: str) -> pd.DataFrame:
    """All cells as stripped strings; index i is line i + 2 of the file (blank lines dropped after)."""
    text = read_text_file(path, what)
    try:
        # skip_blank_lines=False keeps row numbers equal to file lines for the messages
        df = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False, skip_blank_lines=False)
    except pd.errors.EmptyDataError:
        raise SpecError(f"{what}: {str(path)!r} is empty; expected a header row and data rows") from None
    except (pd.errors.ParserError, ValueError) as e:
        msg = str(e).strip().splitlines()[-1] if str(e).strip() else type(e).__name__
        raise SpecError(f"{what}: {str(path)!r} is not a valid CSV file ({msg})") from None
    df.columns = [str(c).strip() for c in df.columns]
    df = df.apply(lambda s: s.str.strip())
    df.index = np.arange(len(df)) + 2
    df = df[(df != "").any(axis=1)]
    return df


def require_columns(df: pd.DataFrame, needed: dict[str, str], what: str) -> None:
    """`needed` maps a column name to the option that renames it."""
    for col, option in needed.items():
        if col not in df.columns:
            found = ", ".join(repr(c) for c in df.columns) or "none"
            raise SpecError(f"{what}: column {col!r} missing (columns found: {found}; "
                            f"name another column with {option})")


def _bad(what: str, col: str, line: int, allowed: str, got: str) -> SpecError:
    return SpecError(f"{what}: column {col!r}, line {line}: must be {allowed}, got {got!r}")


def parse_whole_numbers(s: pd.Series, what: str, col: str, lo: int, hi: int) -> np.ndarray:
    """Whole numbers in [lo, hi] ("3" or "3.0"); the first bad cell is reported."""
    num = pd.to_numeric(s, errors="coerce")
    ok = num.notna() & np.isfinite(num) & (num == np.round(num)) & (num >= lo) & (num <= hi)
    if not ok.all():
        line = int(ok.index[~ok.to_numpy()][0])
        raise _bad(what, col, line, f"a whole number in [{lo}, {hi}]", str(s.loc[line]))
    return num.to_numpy(dtype=np.int64)


def _parse_dates(s: pd.Series, fmt: str, what: str, col: str) -> pd.Series:
    d = pd.to_datetime(s, format=fmt, errors="coerce")
    if d.isna().any():
        line = int(d.index[d.isna().to_numpy()][0])
        raise _bad(what, col, line, f"a date in the format {fmt} (choose another with --date-format)",
                   str(s.loc[line]))
    return d


def read_sales(path: str | Path, columns: Columns = Columns(), date_format: str = "%Y-%m-%d",
               max_units: int = DEFAULT_MAX_UNITS, stockout_required: bool = False) -> SalesData:
    """Read and check a sales file. Without a stock-out column every day counts as uncensored."""
    what = "sales file"
    df = read_csv_table(path, what)
    require_columns(df, {columns.date: "--date-col", columns.item: "--item-col",
                         columns.units: "--units-col"}, what)
    notes = []
    has_flag = columns.stockout is not None and columns.stockout in df.columns
    if columns.stockout is not None and not has_flag:
        if stockout_required:
            require_columns(df, {columns.stockout: "--stockout-col"}, what)
        notes.append(f"no {columns.stockout!r} column: every day is treated as uncensored, so on days "
                     "when stock ran out the fits understate demand")
    if df.empty:
        raise SpecError(f"{what}: {str(path)!r} has a header but no data rows")
    items = df[columns.item]
    if (items == "").any():
        line = int(items.index[(items == "").to_numpy()][0])
        raise _bad(what, columns.item, line, "a non-empty item name", "")
    units = parse_whole_numbers(df[columns.units], what, columns.units, 0, max_units)
    dates = _parse_dates(df[columns.date], date_format, what, columns.date)
    if has_flag:
        flag = df[columns.stockout]
        ok = flag.isin(["0", "1"])
        if not ok.all():
            line = int(flag.index[~ok.to_numpy()][0])
            raise _bad(what, columns.stockout, line, "0 or 1 (1 = stock ran out that day)", str(flag.loc[line]))
        censored = (flag == "1").to_numpy()
    else:
        censored = np.zeros(len(df), dtype=bool)
    dup = pd.Series(list(zip(items, dates)), index=df.index).duplicated()
    if dup.any():
        line = int(dup.index[dup.to_numpy()][0])
        raise SpecError(f"{what}: line {line}: item {items.loc[line]!r} has a second row for "
                        f"{dates.loc[line]:%Y-%m-%d} (one row per item and day)")
    table = pd.DataFrame({"item": items.to_numpy(), "date": dates.to_numpy(), "units": units,
                          "censored": censored})
    out = []
    for name, g in table.groupby("item", sort=False):
        g = g.sort_values("date")
        span = int((g["date"].iloc[-1] - g["date"].iloc[0]).days) + 1
        out.append(ItemHistory(str(name), g["date"].to_numpy(), g["units"].to_numpy(np.int64),
                               g["censored"].to_numpy(bool), missing_days=span - len(g)))
    return SalesData(out, notes)
