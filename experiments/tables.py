"""Results tables on disk: written as CSV and Parquet from one frame, read back with checks, and
compared cell by cell with reference results (`invbench bench-compare`).

A table read here comes from anywhere (a results folder, a reference file, a user's edit), so
every problem with it is a one-line SpecError naming the file and the column.
"""
from __future__ import annotations

import math
import os
import tempfile
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from invbench.envs.errors import SpecError

#: Columns `compare_results` reads; `status`, `params` and `kind` are used when present.
NEEDED_COLUMNS = ("instance", "policy", "seed", "method", "cost", "ci_halfwidth")


def write_results(root: Path, df: pd.DataFrame) -> None:
    """results.csv and (when pyarrow is installed) results.parquet from the same frame.

    Both are written to temp files first and renamed together, so a kill can only leave both
    old or both new (up to the instant between two renames). Without pyarrow a stale Parquet
    file is removed rather than left disagreeing with the CSV.
    """
    root = Path(root)
    try:
        import pyarrow  # noqa: F401  (optional: Parquet only when pyarrow is there)
        have_parquet = True
    except ImportError:
        have_parquet = False
    temps: list[tuple[str, Path]] = []
    try:
        temps.append((_temp(root, "results.csv"), root / "results.csv"))
        with open(temps[-1][0], "w", encoding="utf-8", newline="") as f:
            df.to_csv(f, index=False)
        if have_parquet:
            temps.append((_temp(root, "results.parquet"), root / "results.parquet"))
            df.to_parquet(temps[-1][0], index=False)
        for tmp, target in temps:
            os.replace(tmp, target)
    finally:
        for tmp, _ in temps:
            Path(tmp).unlink(missing_ok=True)
    if not have_parquet:
        (root / "results.parquet").unlink(missing_ok=True)


def _temp(root: Path, name: str) -> str:
    fd, tmp = tempfile.mkstemp(dir=root, prefix=f".{name}.", suffix=".tmp")
    os.close(fd)
    os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes 0600; results follow the usual umask
    return tmp


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def read_table(path: str | Path, what: str = "results") -> pd.DataFrame:
    """A results table from a folder (results.csv inside it) or a CSV/Parquet file, checked:
    `what` names the argument in error messages (e.g. "reference")."""
    p = Path(path)
    if p.is_dir():
        p = p / "results.csv"
    if not p.is_file():
        raise SpecError(f"{what}: {str(p)!r} does not exist (a results folder or a CSV/Parquet file)")
    df = _load(p, what)
    check_table(df, what, p)
    return df


def _load(p: Path, what: str) -> pd.DataFrame:
    try:
        head = p.open("rb").read(4096)
    except OSError as e:
        raise SpecError(f"{what}: {p} cannot be read ({e.strerror or e})") from None
    if not head:
        raise SpecError(f"{what}: {p} is empty (a results CSV/Parquet file has a header and rows)")
    if head.startswith(b"PAR1") or p.suffix == ".parquet":
        try:
            return pd.read_parquet(p)
        except Exception as e:  # pyarrow raises several types for a damaged file
            raise SpecError(f"{what}: {p} is not a readable Parquet file ({_first_line(e)})") from None
    if b"\0" in head:
        raise SpecError(f"{what}: {p} is a binary file, not a results CSV")
    try:
        with warnings.catch_warnings():
            # a row longer than the header would otherwise silently become the index or be cut
            warnings.simplefilter("error", pd.errors.ParserWarning)
            return pd.read_csv(p, keep_default_na=True, encoding="utf-8", index_col=False)
    except UnicodeDecodeError as e:
        raise SpecError(f"{what}: {p} is not UTF-8 text (byte offset {e.start})") from None
    except (pd.errors.ParserError, pd.errors.EmptyDataError, pd.errors.ParserWarning, ValueError) as e:
        raise SpecError(f"{what}: {p} is not a readable CSV file ({_first_line(e)})") from None


def check_table(df: pd.DataFrame, what: str, source: Any = "") -> None:
    """Columns there, values of the right type, one row per (instance, policy, seed)."""
    where = f" in {source}" if source else ""
    missing = [c for c in NEEDED_COLUMNS if c not in df.columns]
    if missing:
        raise SpecError(f"{what}.{missing[0]}: column missing{where} (needed: {', '.join(NEEDED_COLUMNS)})")
    if df.empty:
        raise SpecError(f"{what}: no rows{where}")
    seed = pd.to_numeric(df["seed"], errors="coerce")
    bad = ~(seed.notna() & (seed >= 0) & (seed == seed.round()))
    _refuse(df, bad, what, "seed", "an integer >= 0", where)
    ok = df["status"].astype(str) == "ok" if "status" in df.columns else pd.Series(True, index=df.index)
    cost = pd.to_numeric(df["cost"], errors="coerce")
    _refuse(df, ok & ~cost.map(_finite), what, "cost", "a finite number (rows with status ok)", where)
    ci = pd.to_numeric(df["ci_halfwidth"], errors="coerce")
    bad_ci = (ci.isna() & df["ci_halfwidth"].notna()) | (ci < 0) | ci.isin([math.inf])
    _refuse(df, bad_ci, what, "ci_halfwidth", "a finite number >= 0 or empty", where)
    for col in ("instance", "policy", "method"):
        _refuse(df, ok & (df[col].isna() | (df[col].astype(str).str.strip() == "")), what, col,
                "a non-empty text", where)
    keys = list(zip(df["instance"].astype(str), df["policy"].astype(str), seed.fillna(-1).astype("int64")))
    seen: set[tuple[str, str, int]] = set()
    for i, k in enumerate(keys):
        if bool(ok.iloc[i]) and k in seen:
            raise SpecError(f"{what}: cell ({k[0]}, {k[1]}, seed {k[2]}) appears twice{where} (row {i + 2})")
        seen.add(k)


def _refuse(df: pd.DataFrame, bad: pd.Series, what: str, col: str, rule: str, where: str) -> None:
    if bool(bad.any()):
        i = int(bad.to_numpy().nonzero()[0][0])
        raise SpecError(f"{what}.{col}: must be {rule}{where}; row {i + 2} holds {str(df[col].iloc[i])[:30]!r}")


def _finite(v: Any) -> bool:
    return isinstance(v, (int, float)) and math.isfinite(v)


def _first_line(e: BaseException) -> str:
    txt = str(e).strip().splitlines()
    return f"{type(e).__name__}: {txt[0][:120]}" if txt else type(e).__name__


@dataclass
class Comparison:
    """Outcome of comparing a results table with a reference table, cell by cell."""

    compared: int
    differences: list[str]
    missing: list[str]
    extra: list[str]
    notes: list[str]

    @property
    def ok(self) -> bool:
        return not self.differences and not self.missing

    def lines(self) -> list[str]:
        out = [f"DIFF {d}" for d in self.differences] + [f"MISSING {m}" for m in self.missing]
        out += [f"note: {n}" for n in self.notes]
        if self.extra:
            out.append(f"note: {len(self.extra)} cell(s) not in the reference were not compared")
        out.append(f"bench-compare: {self.compared} cells compared, {len(self.differences)} differ, "
                   f"{len(self.missing)} missing -> {'OK' if self.ok else 'MISMATCH'}")
        return out

    def to_dict(self) -> dict[str, Any]:
        return {"compared": self.compared, "differences": self.differences, "missing": self.missing,
                "extra": self.extra, "notes": self.notes, "ok": self.ok}


def compare_results(new: pd.DataFrame, ref: pd.DataFrame, rtol_exact: float = 2e-6) -> Comparison:
    """Exact cells: |new - ref| <= rtol_exact * |ref|. Simulated cells: within the 95 % interval of
    the difference of two independent estimates, sqrt(ci_new^2 + ci_ref^2)."""

    def index(df: pd.DataFrame) -> dict[tuple, Any]:
        ok = df[df["status"] == "ok"] if "status" in df.columns else df
        return {(str(r.instance), str(r.policy), int(r.seed)): r for r in ok.itertuples(index=False)}

    a, b = index(new), index(ref)
    diffs, missing, notes = [], [], []
    for k, r in b.items():
        label = f"{k[0]} | {k[1]} seed {k[2]}"
        n = a.get(k)
        if n is None:
            missing.append(label)
            continue
        if n.method != r.method:
            diffs.append(f"{label}: method {n.method} vs reference {r.method}")
            continue
        delta = float(n.cost) - float(r.cost)
        if r.method == "exact":
            tol = rtol_exact * abs(float(r.cost)) + 1e-12
        else:
            tol = math.hypot(finite_or_zero(n.ci_halfwidth), finite_or_zero(r.ci_halfwidth))
        n_params, r_params = getattr(n, "params", ""), getattr(r, "params", "")
        if not abs(delta) <= tol:
            diffs.append(f"{label}: cost {float(n.cost):.6f} vs reference {float(r.cost):.6f} "
                         f"(diff {delta:+.3g}, tolerance {tol:.3g}, {r.method})")
        elif str(n_params) != str(r_params) and getattr(n, "kind", "") != "agent":
            notes.append(f"{label}: parameters {n_params} vs reference {r_params} (cost within tolerance)")
    extra = [f"{k[0]} | {k[1]} seed {k[2]}" for k in a if k not in b]
    return Comparison(len(b) - len(missing), diffs, missing, extra, notes)


def finite_or_zero(v: Any) -> float:
    """A number from a results cell; 0 for a blank, text or non-finite value."""
    try:
        f = float(v)
    except (TypeError, ValueError):
        return 0.0
    return f if math.isfinite(f) else 0.0
