"""The result store of a benchmark run: one JSON file per finished cell, a tidy table, metadata.

Layout of a results folder DIR:
    DIR/suite.toml          the suite as run, every instance written out inline
    DIR/cells/ID.json       one finished cell (written atomically, with its own digest; its
                            presence = done)
    DIR/failed/ID.json      a cell that raised; retried by the next run
    DIR/damaged/            cell files that could not be trusted (unreadable, incomplete or
                            edited), moved aside with a line in damaged/log.txt; their cells rerun
    DIR/results.csv         one row per cell of the suite (rebuilt from cells/), and .parquet
    DIR/run.json            metadata: versions, git commit, command lines, machine
The table is always rebuilt from the cell files, so a run killed at any moment loses at most
the cells that were still running, and a rerun never duplicates a row.
"""
from __future__ import annotations

import datetime as _dt
import json
import math
import os
import sys
import tempfile
from pathlib import Path
from typing import Any, Callable, Iterable

import pandas as pd

from invbench.envs.errors import SpecError
from invbench.envs.models import COST_PARTS, MODEL_KEYS

from .cellfile import DamagedCell, decode_cell, encode_cell
from .suite import Cell, Suite, load_suite
from .tables import Comparison, compare_results, read_table, write_results  # noqa: F401  (re-exported)

#: lead_time: the fixed lead time, or the mean of a random one (whose pmf is in lead_time_pmf)
INSTANCE_COLUMNS = ["suite", "instance", "model", "lead_time", "lead_time_pmf", "holding_cost", "shortage_cost",
                    "unit_order_cost", "fixed_order_cost", "order_cap_units", "case_pack",
                    "discount", "demand", "demand_mean", *MODEL_KEYS]
POLICY_COLUMNS = ["policy", "kind", "policy_name", "params", "seed"]
#: cost parts: one column per named part of any registered model (empty where a model has none)
RESULT_COLUMNS = ["cost", "ci_halfwidth", "method", "gap", "gap_ci", "optimum", "lower", "upper",
                  *COST_PARTS, "status", "error", "note"]
#: Columns that differ between two runs of the same cells; comparisons leave them out.
TIMING_COLUMNS = ["wall_seconds", "cpu_seconds", "worker", "finished_at"]
COLUMNS = INSTANCE_COLUMNS + POLICY_COLUMNS + RESULT_COLUMNS + TIMING_COLUMNS + ["cell_id"]


def atomic_write(path: Path, data: str | bytes) -> None:
    """Write to a temp file in the same folder, then rename over the target (atomic on POSIX)."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        os.fchmod(fd, 0o666 & ~_umask())  # mkstemp makes 0600; results follow the usual umask
        with os.fdopen(fd, "wb") as f:
            f.write(data.encode() if isinstance(data, str) else data)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


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
    """A results folder. `open(suite)` binds it to one suite; a different suite is refused.

    `warn` receives one line for each cell file moved aside as damaged (default: stderr).
    """

    def __init__(self, root: str | Path, warn: Callable[[str], None] | None = None) -> None:
        self.root = Path(root)
        self.cells_dir = self.root / "cells"
        self.failed_dir = self.root / "failed"
        self.damaged_dir = self.root / "damaged"
        self.warn = warn or (lambda line: print(line, file=sys.stderr, flush=True))

    # ------------------------------------------------------------------ binding
    def open(self, suite: Suite) -> None:
        suite_file = self.root / "suite.toml"
        if suite_file.is_file():
            try:
                old = load_suite(suite_file)
            except SpecError as e:
                raise SpecError(f"--out: {suite_file} cannot be read ({e}); choose another folder") from None
            if old.name != suite.name:
                raise SpecError(f"--out: {self.root} holds results of suite {old.name!r}, not "
                                f"{suite.name!r}; choose another folder")
        self.cells_dir.mkdir(parents=True, exist_ok=True)
        self.failed_dir.mkdir(parents=True, exist_ok=True)
        for stray in list(self.cells_dir.glob(".*.tmp")) + list(self.failed_dir.glob(".*.tmp")):
            stray.unlink(missing_ok=True)  # left by a run killed in the middle of a write
        for stray in self.root.glob(".results.*.tmp"):
            stray.unlink(missing_ok=True)
        atomic_write(suite_file, suite.to_toml())
        self._drop_superseded_failures(suite)

    def _drop_superseded_failures(self, suite: Suite) -> None:
        """Remove failure records of cells whose code or settings changed since (new cell id,
        same instance, policy label and seed): they are rerun and the old failure no longer shows."""
        cells = suite.cells()
        ids = {c.cell_id for c in cells}
        slots = {(c.instance_name, c.policy.label, c.seed) for c in cells}
        for cid, rec in self._scan(self.failed_dir).items():
            if cid not in ids and (rec.get("instance"), rec.get("policy"), rec.get("seed")) in slots:
                (self.failed_dir / f"{cid}.json").unlink(missing_ok=True)

    def suite(self) -> Suite:
        f = self.root / "suite.toml"
        if not f.is_file():
            raise SpecError(f"results folder: {self.root} has no suite.toml (is it a bench output folder?)")
        return load_suite(f)

    # ------------------------------------------------------------------ cells
    def _scan(self, folder: Path) -> dict[str, dict[str, Any]]:
        """cell id -> record of every trustworthy file in `folder`; the others are moved aside."""
        out = {}
        for p in sorted(folder.glob("*.json")):
            try:
                out[p.stem] = decode_cell(p)
            except DamagedCell as e:
                self._move_aside(p, str(e))
        return out

    def _move_aside(self, path: Path, reason: str) -> None:
        self.damaged_dir.mkdir(parents=True, exist_ok=True)
        stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y%m%dT%H%M%S%fZ")
        target = self.damaged_dir / f"{path.parent.name}-{path.stem}-{stamp}.json"
        try:
            os.replace(path, target)
        except FileNotFoundError:
            return  # already gone (another reader moved it)
        line = f"{target.name}\t{path.parent.name}/{path.name}\t{reason}\n"
        with open(self.damaged_dir / "log.txt", "a", encoding="utf-8") as f:
            f.write(line)
        self.warn(f"invbench: warning: {path.parent.name}/{path.name} is damaged ({reason}); moved to "
                  f"{target.relative_to(self.root)}, its cell will be run again")

    def damaged(self) -> list[tuple[str, str, str]]:
        """(file in damaged/, original file, reason) of every file ever moved aside here."""
        log = self.damaged_dir / "log.txt"
        try:
            lines = log.read_text(encoding="utf-8", errors="replace").splitlines()
        except OSError:
            return []
        return [tuple(ln.split("\t", 2)) for ln in lines if ln.count("\t") >= 2]  # type: ignore[misc]

    def finished(self) -> dict[str, dict[str, Any]]:
        """cell id -> record of every successfully finished cell in the folder."""
        return {k: r for k, r in self._scan(self.cells_dir).items() if r.get("status") == "ok"}

    def failed(self) -> dict[str, dict[str, Any]]:
        return self._scan(self.failed_dir)

    def save(self, record: dict[str, Any]) -> None:
        """Store one record; a record that breaks the cell format is stored as a failure."""
        rec = to_jsonable(record)
        try:
            blob = encode_cell(rec)
        except DamagedCell as e:
            # e.g. a custom cell that returned no finite cost: kept as a failure, retried later
            rec = {**rec, "status": "failed", "error": f"invalid cell result: {e}",
                   **{k: str(rec.get(k) or "") for k in ("suite", "instance", "policy", "kind")}}
            blob = encode_cell(rec)
        cid = rec["cell_id"]
        if rec.get("status") == "ok":
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
        """Rebuild the table from the cell files and write results.csv and results.parquet."""
        df = self.table(suite)
        write_results(self.root, df)
        return df

    # ------------------------------------------------------------------ metadata
    def metadata(self) -> dict[str, Any]:
        f = self.root / "run.json"
        if f.is_file():
            try:
                meta = json.loads(f.read_text(encoding="utf-8"))
            except (OSError, ValueError):  # not UTF-8 or not JSON: keep it aside, start afresh
                meta = None
            if isinstance(meta, dict) and isinstance(meta.get("invocations", []), list):
                return meta
            self._move_aside_meta(f)
        return {"invocations": []}

    def _move_aside_meta(self, f: Path) -> None:
        self.damaged_dir.mkdir(parents=True, exist_ok=True)
        stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y%m%dT%H%M%S%fZ")
        os.replace(f, self.damaged_dir / f"run-{stamp}.json")
        self.warn(f"invbench: warning: run.json is damaged; moved to damaged/run-{stamp}.json, a new one is started")

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
            law = spec.lead_time_law
            row.update(model=spec.model, lead_time=spec.lead_time if law is None else law.mean,
                       lead_time_pmf=None if law is None else law.describe(), holding_cost=spec.holding_cost,
                       shortage_cost=spec.shortage_cost, unit_order_cost=spec.unit_order_cost,
                       fixed_order_cost=spec.fixed_order_cost, order_cap_units=spec.order_cap_units,
                       case_pack=spec.case_pack, discount=spec.discount,
                       demand=spec.demand.describe(), demand_mean=spec.demand.mean, **dict(spec.extra))
            for key in spec.model_def.unused_common:  # empty, not a default the model ignores
                row[key] = None
        opt = optimum.get(r.get("instance"))
        cost = r.get("cost")
        if opt is not None and cost is not None and opt > 0:
            row["optimum"] = opt
            row["gap"] = (cost - opt) / opt
            row["gap_ci"] = (r.get("ci_halfwidth") or 0.0) / opt
        rows.append(row)
    df = pd.DataFrame(rows, columns=COLUMNS)
    for c in ("cost", "ci_halfwidth", "gap", "gap_ci", "optimum", "lower", "upper", *COST_PARTS,
              "wall_seconds", "cpu_seconds"):
        df[c] = pd.to_numeric(df[c], errors="coerce").astype("float64")
    return df


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
