"""The result store of a benchmark run: one JSON file per finished cell, a tidy table, metadata.

Layout of a results folder DIR:
    DIR/suite.toml          the suite as run, every instance written out inline
    DIR/cells/ID.json       one finished cell (written atomically; its presence = done)
    DIR/failed/ID.json      a cell that raised; retried by the next run
    DIR/results.csv         one row per cell of the suite (rebuilt from cells/), and .parquet
    DIR/run.json            metadata: versions, git commit, command lines, machine
The table is always rebuilt from the cell files, so a run killed at any moment loses at most
the cells that were still running, and a rerun never duplicates a row.
"""
from __future__ import annotations

import json
import math
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable

import pandas as pd

from invbench.envs.errors import SpecError

from .suite import Cell, Suite, load_suite

INSTANCE_COLUMNS = ["suite", "instance", "model", "lead_time", "holding_cost", "shortage_cost",
                    "unit_order_cost", "fixed_order_cost", "order_cap_units", "case_pack",
                    "discount", "demand", "demand_mean"]
POLICY_COLUMNS = ["policy", "kind", "policy_name", "params", "seed"]
RESULT_COLUMNS = ["cost", "ci_halfwidth", "method", "gap", "gap_ci", "optimum", "lower", "upper",
                  "holding", "shortage", "ordering", "status", "error", "note"]
#: Columns that differ between two runs of the same cells; comparisons leave them out.
TIMING_COLUMNS = ["wall_seconds", "cpu_seconds", "worker", "finished_at"]
COLUMNS = INSTANCE_COLUMNS + POLICY_COLUMNS + RESULT_COLUMNS + TIMING_COLUMNS + ["cell_id"]


def atomic_write(path: Path, data: str | bytes) -> None:
    """Write to a temp file in the same folder, then rename over the target (atomic on POSIX)."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(data.encode() if isinstance(data, str) else data)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def to_jsonable(obj: Any) -> Any:
    """Plain JSON types from numpy scalars/arrays and nested containers; NaN becomes null."""
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if hasattr(obj, "tolist"):
        return to_jsonable(obj.tolist())
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if isinstance(obj, (str, int, float, bool)) or obj is None:
        return obj
    return str(obj)


class ResultStore:
    """A results folder. `open(suite)` binds it to one suite; a different suite is refused."""

    def __init__(self, root: str | Path) -> None:
        self.root = Path(root)
        self.cells_dir = self.root / "cells"
        self.failed_dir = self.root / "failed"

    # ------------------------------------------------------------------ binding
    def open(self, suite: Suite) -> None:
        suite_file = self.root / "suite.toml"
        if suite_file.is_file():
            old = load_suite(suite_file)
            if old.name != suite.name:
                raise SpecError(f"--out: {self.root} holds results of suite {old.name!r}, not "
                                f"{suite.name!r}; choose another folder")
        self.cells_dir.mkdir(parents=True, exist_ok=True)
        self.failed_dir.mkdir(parents=True, exist_ok=True)
        for stray in list(self.cells_dir.glob(".*.tmp")) + list(self.failed_dir.glob(".*.tmp")):
            stray.unlink(missing_ok=True)  # left by a run killed in the middle of a write
        atomic_write(suite_file, suite.to_toml())

    def suite(self) -> Suite:
        f = self.root / "suite.toml"
        if not f.is_file():
            raise SpecError(f"results folder: {self.root} has no suite.toml (is it a bench output folder?)")
        return load_suite(f)

    # ------------------------------------------------------------------ cells
    def _read(self, path: Path) -> dict[str, Any] | None:
        try:
            return json.loads(path.read_text())
        except (OSError, json.JSONDecodeError):
            return None  # unreadable: treated as not finished, so it is simply run again

    def finished(self) -> dict[str, dict[str, Any]]:
        """cell id -> record of every successfully finished cell in the folder."""
        out = {}
        for p in sorted(self.cells_dir.glob("*.json")):
            rec = self._read(p)
            if rec is not None and rec.get("status") == "ok":
                out[p.stem] = rec
        return out

    def failed(self) -> dict[str, dict[str, Any]]:
        out = {}
        for p in sorted(self.failed_dir.glob("*.json")):
            rec = self._read(p)
            if rec is not None:
                out[p.stem] = rec
        return out

    def save(self, record: dict[str, Any]) -> None:
        cid = record["cell_id"]
        blob = json.dumps(to_jsonable(record), indent=1, sort_keys=True)
        if record.get("status") == "ok":
            atomic_write(self.cells_dir / f"{cid}.json", blob)
            (self.failed_dir / f"{cid}.json").unlink(missing_ok=True)
        else:
            atomic_write(self.failed_dir / f"{cid}.json", blob)

    # ------------------------------------------------------------------ table
    def records(self, cells: Iterable[Cell]) -> list[dict[str, Any]]:
        """Records for the given cells in suite order (finished, else failed, else missing)."""
        done, bad = self.finished(), self.failed()
        out = []
        for c in cells:
            rec = done.get(c.cell_id) or bad.get(c.cell_id)
            if rec is not None:
                out.append(rec)
        return out

    def table(self, suite: Suite | None = None) -> pd.DataFrame:
        suite = suite or self.suite()
        cells = suite.cells()
        return build_table(self.records(cells), {c.cell_id: c for c in cells})

    def write_table(self, suite: Suite | None = None) -> pd.DataFrame:
        df = self.table(suite)
        atomic_write(self.root / "results.csv", df.to_csv(index=False))
        try:
            import pyarrow  # noqa: F401  (optional: Parquet only when pyarrow is there)
        except ImportError:
            return df
        fd, tmp = tempfile.mkstemp(dir=self.root, prefix=".results.parquet.", suffix=".tmp")
        os.close(fd)
        try:
            df.to_parquet(tmp, index=False)
            os.replace(tmp, self.root / "results.parquet")
        finally:
            Path(tmp).unlink(missing_ok=True)
        return df

    # ------------------------------------------------------------------ metadata
    def metadata(self) -> dict[str, Any]:
        f = self.root / "run.json"
        if f.is_file():
            try:
                return json.loads(f.read_text())
            except json.JSONDecodeError:
                pass
        return {"invocations": []}

    def add_invocation(self, info: dict[str, Any]) -> None:
        """Append one bench invocation (a first run or a resume) to run.json."""
        meta = self.metadata()
        meta.setdefault("invocations", []).append(to_jsonable(info))
        for key in ("suite", "versions", "git", "machine"):
            if key in info:
                meta[key] = to_jsonable(info[key])
        atomic_write(self.root / "run.json", json.dumps(meta, indent=1, sort_keys=True))


def build_table(records: list[dict[str, Any]], cells: dict[str, Cell]) -> pd.DataFrame:
    """One row per record; the gap is joined from the optimum cell of the same instance."""
    optimum = {r["instance"]: r["cost"] for r in records
               if r.get("kind") == "optimum" and r.get("status") == "ok"}
    rows = []
    for r in records:
        cell = cells.get(r["cell_id"])
        spec = cell.instance if cell is not None else None
        row: dict[str, Any] = {c: None for c in COLUMNS}
        row.update({k: r.get(k) for k in POLICY_COLUMNS + RESULT_COLUMNS + TIMING_COLUMNS + ["cell_id"]
                    if k in r})
        row["params"] = json.dumps(r.get("params") or {}, sort_keys=True)
        row["suite"] = r.get("suite")
        row["instance"] = r.get("instance")
        if spec is not None:
            row.update(model=spec.model, lead_time=spec.lead_time, holding_cost=spec.holding_cost,
                       shortage_cost=spec.shortage_cost, unit_order_cost=spec.unit_order_cost,
                       fixed_order_cost=spec.fixed_order_cost, order_cap_units=spec.order_cap_units,
                       case_pack=spec.case_pack, discount=spec.discount,
                       demand=spec.demand.describe(), demand_mean=spec.demand.mean)
        opt = optimum.get(r.get("instance"))
        cost = r.get("cost")
        if opt is not None and cost is not None and opt > 0:
            row["optimum"] = opt
            row["gap"] = (cost - opt) / opt
            row["gap_ci"] = (r.get("ci_halfwidth") or 0.0) / opt
        rows.append(row)
    df = pd.DataFrame(rows, columns=COLUMNS)
    for c in ("cost", "ci_halfwidth", "gap", "gap_ci", "optimum", "lower", "upper", "holding",
              "shortage", "ordering", "wall_seconds", "cpu_seconds"):
        df[c] = pd.to_numeric(df[c], errors="coerce").astype("float64")
    return df


def read_table(path: str | Path) -> pd.DataFrame:
    """A results table from a folder (results.csv inside it) or a CSV/Parquet file."""
    p = Path(path)
    if p.is_dir():
        p = p / "results.csv"
    if not p.is_file():
        raise SpecError(f"results: {str(p)!r} does not exist")
    if p.suffix == ".parquet":
        return pd.read_parquet(p)
    return pd.read_csv(p, keep_default_na=True)


def collect_metadata() -> dict[str, Any]:
    """Package versions, git commit of the code that ran, and the machine."""
    import platform
    import subprocess
    import sys
    from importlib import metadata as md

    versions = {"python": platform.python_version()}
    for pkg in ("invbench", "numpy", "scipy", "pandas", "gymnasium", "torch", "stable-baselines3",
                "matplotlib", "pyarrow", "ray"):
        try:
            versions[pkg] = md.version(pkg)
        except md.PackageNotFoundError:
            pass
    git: dict[str, Any] = {"commit": None, "dirty": None}
    here = Path(__file__).resolve().parent
    try:
        head = subprocess.run(["git", "-C", str(here), "rev-parse", "HEAD"], capture_output=True,
                              text=True, timeout=10)
        if head.returncode == 0:
            git["commit"] = head.stdout.strip()
            st = subprocess.run(["git", "-C", str(here), "status", "--porcelain", "--untracked-files=no"],
                                capture_output=True, text=True, timeout=10)
            git["dirty"] = bool(st.stdout.strip())
    except (OSError, subprocess.SubprocessError):
        pass
    try:
        mem_gb = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / 2**30
    except (ValueError, OSError, AttributeError):
        mem_gb = None
    machine = {"hostname": platform.node(), "platform": platform.platform(),
               "processor": platform.machine(), "cpu_count": os.cpu_count(),
               "memory_gb": round(mem_gb, 1) if mem_gb else None, "executable": sys.executable}
    return {"versions": versions, "git": git, "machine": machine}


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
            tol = math.hypot(_f(n.ci_halfwidth), _f(r.ci_halfwidth))
        if not abs(delta) <= tol:
            diffs.append(f"{label}: cost {float(n.cost):.6f} vs reference {float(r.cost):.6f} "
                         f"(diff {delta:+.3g}, tolerance {tol:.3g}, {r.method})")
        elif str(n.params) != str(r.params) and n.kind != "agent":
            notes.append(f"{label}: parameters {n.params} vs reference {r.params} (cost within tolerance)")
    extra = [f"{k[0]} | {k[1]} seed {k[2]}" for k in a if k not in b]
    return Comparison(len(b) - len(missing), diffs, missing, extra, notes)


def _f(v: Any) -> float:
    try:
        f = float(v)
    except (TypeError, ValueError):
        return 0.0
    return f if math.isfinite(f) else 0.0
