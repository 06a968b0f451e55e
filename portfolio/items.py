"""Reading a portfolio: one instance per item, from an items CSV (costs, lead time and demand law
on each row), from a folder written by `invbench fit` (its fit_summary.csv names the files), or
from a folder of instance files. Every problem is one line naming the file, column and line.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from invbench.envs.errors import SpecError
from invbench.envs.spec import COMMON_FIELDS, InstanceSpec, load_spec, spec_from_dict
from invbench.fitting.reading import read_csv_table, require_columns

#: Columns of an items CSV besides `item`: the instance settings and the demand law.
SETTING_COLUMNS = ("model", *COMMON_FIELDS, "shelf_life", "issuing", "outdating_cost")
DEMAND_COLUMNS = ("demand", "mean", "variance", "std", "n", "p", "low", "high", "pmf", "counts")
ITEM_COLUMNS = ("item", *SETTING_COLUMNS, *DEMAND_COLUMNS)
#: Columns that hold a list of numbers (separated by spaces or semicolons).
LIST_COLUMNS = ("pmf", "counts")
#: Most items in one portfolio (each stage of a run is one suite, and a suite holds at most
#: 10,000 instances; see `experiments.suite.MAX_GRID`).
MAX_ITEMS = 10_000
FIT_SUMMARY = "fit_summary.csv"


@dataclass(frozen=True)
class PortfolioItem:
    """One item: its name, its instance (named after the item) and where it was read from."""

    name: str
    spec: InstanceSpec
    source: str

    def to_dict(self) -> dict[str, Any]:
        return {"item": self.name, "instance": self.spec.to_dict(), "source": self.source}


def read_portfolio(source: str | Path, max_items: int = MAX_ITEMS) -> list[PortfolioItem]:
    """Items from an items CSV, a fit summary CSV, a folder written by `invbench fit` or a
    folder of instance TOML files; names must be unique."""
    p = Path(source)
    if p.is_dir():
        summary = p / FIT_SUMMARY
        items = _from_fit_summary(summary) if summary.is_file() else _from_toml_folder(p)
    elif p.is_file():
        head = read_csv_table(p, "items file")
        if {"item", "file", "chosen"} <= set(head.columns):
            items = _from_fit_summary(p)
        else:
            items = _from_items_csv(p, head)
    else:
        raise SpecError(f"items: {str(p)!r} is neither an items CSV file nor a folder written by `invbench fit`")
    if not items:
        raise SpecError(f"items: {str(p)!r} holds no items")
    if len(items) > max_items:
        raise SpecError(f"items: {len(items):,} items, over the limit of {max_items:,} per run; split the portfolio")
    seen: dict[str, str] = {}
    for it in items:
        if it.name in seen:
            raise SpecError(f"items: item {it.name!r} appears twice ({seen[it.name]} and {it.source}); one entry per item")
        seen[it.name] = it.source
    return items


def _value(raw: str, col: str) -> Any:
    """A CSV cell as the spec wants it: numbers as int/float, lists split, anything else a string."""
    if col in LIST_COLUMNS:
        parts = [x for x in raw.replace(";", " ").split() if x]
        return [_value(x, "") for x in parts]
    try:
        return int(raw)
    except ValueError:
        pass
    try:
        return float(raw)
    except ValueError:
        return raw


def _where_to_column(msg: str) -> tuple[str, str]:
    """("column", rest) from a spec message such as "instance.lead_time: must be ..."."""
    head, sep, rest = msg.partition(": ")
    if not sep:
        return "", msg
    field = head.removeprefix("instance.")
    if field == "demand.distribution":
        return "demand", rest
    return field.removeprefix("demand."), rest


def _from_items_csv(path: Path, df: Any) -> list[PortfolioItem]:
    what = f"items file {path.name}"
    require_columns(df, {"item": "an `item` column (one row per item)"}, what)
    unknown = [c for c in df.columns if c not in ITEM_COLUMNS]
    if unknown:
        raise SpecError(f"{what}: column {unknown[0]!r} unknown (allowed: {', '.join(ITEM_COLUMNS)})")
    if "demand" not in df.columns:
        raise SpecError(f"{what}: column 'demand' missing: the demand law of each item, one of poisson, "
                        "negative_binomial, geometric, binomial, uniform, empirical, normal, gamma")
    out = []
    for line, row in df.iterrows():
        name = row["item"]
        if name == "":
            raise SpecError(f"{what}: column 'item', line {line}: must be a non-empty item name, got ''")
        inst: dict[str, Any] = {"name": name, "model": row.get("model") or "lost_sales"}
        demand: dict[str, Any] = {"distribution": row["demand"]}
        for col in df.columns:
            if col in ("item", "model", "demand") or row[col] == "":
                continue
            (demand if col in DEMAND_COLUMNS else inst)[col] = _value(row[col], col)
        inst["demand"] = demand
        try:
            spec = spec_from_dict(inst)
        except SpecError as e:
            col, rest = _where_to_column(str(e))
            at = f"column {col!r}, line {line}" if col in df.columns or col in ITEM_COLUMNS else f"line {line}"
            raise SpecError(f"{what}: {at} (item {name!r}): {rest}") from None
        out.append(PortfolioItem(name, spec, f"{path.name} line {line}"))
    return out


def _named(spec: InstanceSpec, name: str) -> InstanceSpec:
    return spec if spec.name == name else spec_from_dict({**spec.to_dict(), "name": name})


def _load(path: Path, what: str) -> InstanceSpec:
    try:
        return load_spec(path)
    except SpecError as e:
        raise SpecError(f"{what}: {e}") from None
    except (OSError, ValueError, TypeError, KeyError, AttributeError) as e:  # unreadable, not TOML, ...
        raise SpecError(f"{what}: cannot be read as an instance file ({str(e).splitlines()[0] if str(e) else type(e).__name__})") from None


def _from_fit_summary(path: Path) -> list[PortfolioItem]:
    """The items of a fit summary; a `file` entry is looked for beside the summary first, so a
    fit folder can be moved or read from another working directory."""
    what = f"fit summary {path.name}"
    df = read_csv_table(path, what)
    require_columns(df, {"item": "the `item` column of `invbench fit`", "file": "the `file` column of `invbench fit`"}, what)
    out = []
    for line, row in df.iterrows():
        name, file = row["item"], row["file"]
        if not name or not file:
            raise SpecError(f"{what}: line {line}: columns 'item' and 'file' must not be empty")
        beside, given = path.parent / Path(file).name, Path(file)
        target = beside if beside.is_file() else given
        if not target.is_file():
            raise SpecError(f"{what}: column 'file', line {line}: {file!r} not found (nor {str(beside)!r})")
        out.append(PortfolioItem(name, _named(_load(target, f"{what}: column 'file', line {line}"), name), str(target)))
    return out


def _from_toml_folder(folder: Path) -> list[PortfolioItem]:
    files = sorted(folder.glob("*.toml"))
    if not files:
        raise SpecError(f"items: folder {str(folder)!r} has neither {FIT_SUMMARY} nor instance files (*.toml)")
    out = []
    for f in files:
        spec = _load(f, f"items: {f}")
        name = spec.name or f.stem
        out.append(PortfolioItem(name, _named(spec, name), str(f)))
    return out
