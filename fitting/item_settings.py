"""Per-item instance settings (model, lead time, costs) from command-line values or an items CSV.

Every value is checked by building the instance spec itself with a placeholder demand, so the
rules are the spec's own; the messages are re-addressed to the option or the CSV cell.
"""
from __future__ import annotations

from pathlib import Path
from typing import Any, Callable, Mapping

from invbench.envs.errors import SpecError
from invbench.envs.spec import InstanceSpec, spec_from_dict

from .reading import read_csv_table, require_columns

#: Instance fields an items file (or the options) may set, with their types.
SETTING_FIELDS: dict[str, type] = {
    "model": str, "lead_time": int, "holding_cost": float, "shortage_cost": float,
    "unit_order_cost": float, "fixed_order_cost": float, "max_order": int, "case_pack": int,
    "discount": float,
}
_PLACEHOLDER_DEMAND = {"distribution": "poisson", "mean": 1.0}


def check_settings(settings: Mapping[str, Any], where: Callable[[str], str]) -> InstanceSpec:
    """Build a spec with a placeholder demand; a bad value is reported at `where(field)`."""
    try:
        return spec_from_dict({**settings, "demand": dict(_PLACEHOLDER_DEMAND)})
    except SpecError as e:
        msg = str(e)
        head, _, rest = msg.partition(": ")
        field = head.removeprefix("instance.")
        raise SpecError(f"{where(field)}: {rest}") from None


def _convert(raw: str, typ: type, where: str) -> Any:
    if typ is str:
        return raw
    try:
        v = float(raw)
    except ValueError:
        kind = "a whole number" if typ is int else "a number"
        raise SpecError(f"{where}: must be {kind}, got {raw!r}") from None
    if typ is int and v.is_integer():
        return int(v)
    return v  # a non-integer for an integer field is refused by the spec with its range


def read_item_settings(path: str | Path, item_col: str, defaults: Mapping[str, Any],
                       items: list[str]) -> tuple[dict[str, dict[str, Any]], list[str]]:
    """Settings per item: the file's non-empty cells over `defaults`; every item needs one row.

    Returns (settings by item, notes) — a note lists rows for items absent from the sales file.
    """
    what = "items file"
    df = read_csv_table(path, what)
    require_columns(df, {item_col: "--item-col"}, what)
    unknown = [c for c in df.columns if c != item_col and c not in SETTING_FIELDS]
    if unknown:
        raise SpecError(f"{what}: column {unknown[0]!r} unknown (allowed: {item_col}, "
                        f"{', '.join(SETTING_FIELDS)})")
    out: dict[str, dict[str, Any]] = {}
    for line, row in df.iterrows():
        name = row[item_col]
        if name == "":
            raise SpecError(f"{what}: column {item_col!r}, line {line}: must be a non-empty item name, got ''")
        if name in out:
            raise SpecError(f"{what}: column {item_col!r}, line {line}: item {name!r} appears twice "
                            "(one row per item)")
        s = dict(defaults)
        for col in df.columns:
            if col != item_col and row[col] != "":
                s[col] = _convert(row[col], SETTING_FIELDS[col], f"{what}: column {col!r}, line {line}")
        check_settings(s, lambda f, line=line: f"{what}: column {f!r}, line {line}")
        out[name] = s
    for name in items:
        if name not in out:
            raise SpecError(f"{what}: no row for item {name!r} (one row per item of the sales file)")
    extra = [n for n in out if n not in set(items)]
    notes = [f"items file: {len(extra)} row(s) for items not in the sales file, ignored "
             f"(first: {extra[0]!r})"] if extra else []
    return {n: out[n] for n in items}, notes
