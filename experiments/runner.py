"""Runs a whole suite: every cell not yet done, on a backend, with progress, results written.

One cell is `cell.run_cell`; the backends (`backends.py`) run cells in this process, a pool or
on Ray; this module drives them, keeps the store up to date and writes the table at the end.
"""
from __future__ import annotations

import datetime as _dt
import os
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .backends import execute
from .interrupts import finish_first
from .stale import find_stale, move_stale, warning_lines
from .store import ResultStore, collect_metadata
from .suite import Suite


@dataclass
class BenchResult:
    """What one `bench` invocation did; `table` is the full results table of the folder."""

    out: Path
    suite: str
    cells: int
    already_done: int
    ran: int
    failed: list[str]
    seconds: float
    table: Any = field(default=None, repr=False)

    def to_dict(self) -> dict[str, Any]:
        return {"out": str(self.out), "suite": self.suite, "cells": self.cells,
                "already_done": self.already_done, "ran": self.ran, "failed": list(self.failed),
                "seconds": self.seconds}


def summary_line(rec: dict[str, Any], optimum: float | None, done: int, total: int) -> str:
    """One line per finished cell, e.g. `[3/48] inst | base_stock seed 0 | cost ... | gap ...`."""
    head = f"[{done}/{total}] {rec.get('instance')} | {rec.get('policy')} seed {rec.get('seed')}"
    if rec.get("status") != "ok":
        return f"{head} | FAILED: {rec.get('error')}"
    cost, ci = rec.get("cost"), rec.get("ci_halfwidth") or 0.0
    txt = f"{head} | cost {cost:.4f}" + (f" ± {ci:.4f}" if ci else "") + f" ({rec.get('method')})"
    if optimum and rec.get("kind") != "optimum":
        txt += f" | gap {round(100 * (cost - optimum) / optimum, 2) + 0.0:+.2f}%"  # + 0.0: no "-0.00"
    return txt + f" | {rec.get('wall_seconds', 0.0):.1f}s"


def run_bench(suite: Suite, out: str | Path, *, backend: str = "local", workers: int | None = None,
              address: str | None = None, skip_kinds: tuple[str, ...] = (), progress: bool = True,
              command: list[str] | None = None, rerun_stale: bool = False) -> BenchResult:
    """Run every cell of `suite` not yet finished in `out`, storing each as it lands.

    rerun_stale: also rerun finished agent cells trained under other settings than today's
    defaults give (see stale.py); without it they are kept and named in a warning.
    """
    from tqdm import tqdm

    t0 = time.perf_counter()
    out = Path(out).resolve()
    store = ResultStore(out)
    store.open(suite)
    cells = suite.cells(skip_kinds)
    done = store.finished()
    stale = find_stale(cells, done, out)
    if stale and rerun_stale:
        move_stale(out, stale, store.warn)
        done = store.finished()
    else:
        for line in warning_lines(stale):
            store.warn(line)
    pending = [c for c in cells if c.cell_id not in done]
    optimum = {r["instance"]: r["cost"] for r in done.values() if r.get("kind") == "optimum"}
    workers = workers or os.cpu_count() or 1
    info: dict[str, Any] = {"suite": suite.name, "suite_source": suite.source, "backend": backend,
                            "workers": workers if backend == "local" else None, "address": address,
                            "command": command if command is not None else list(sys.argv),
                            "skip_kinds": list(skip_kinds), "stale_cells": len(stale),
                            "rerun_stale": rerun_stale,
                            "started": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
                            "cells": len(cells), "already_done": len(cells) - len(pending),
                            **collect_metadata()}
    print(f"suite {suite.name}: {len(cells)} cells, {len(cells) - len(pending)} already done, "
          f"{len(pending)} to run ({backend}" + (f", {workers} workers" if backend == "local" else "")
          + f") -> {out}", flush=True)
    payloads = []
    for c in pending:
        p = c.to_payload()
        p["artefact_dir"] = str(out / "agents" / c.cell_id)
        payloads.append(p)
    failed: list[str] = []
    ran, completed = 0, False
    bar = tqdm(total=len(cells), initial=len(cells) - len(pending), desc=suite.name, unit="cell",
               disable=None if progress else True, dynamic_ncols=True)  # None: off when not a terminal
    try:
        for rec in execute(payloads, backend=backend, workers=workers, address=address):
            store.save(rec)
            ran += 1
            if rec.get("status") != "ok":
                failed.append(f"{rec.get('instance')} | {rec.get('policy')} seed {rec.get('seed')}: "
                              f"{rec.get('error')}")
            elif rec.get("kind") == "optimum":
                optimum[rec["instance"]] = rec["cost"]
            bar.update(1)
            line = summary_line(rec, optimum.get(rec.get("instance")), len(cells) - len(pending) + ran,
                                len(cells))
            tqdm.write(line)
            sys.stdout.flush()
        completed = True
    finally:
        with finish_first():  # a SIGTERM or Ctrl-C now waits until the results are written
            bar.close()
            table = store.write_table(suite)
            info["finished"] = _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")
            info["ran"], info["failed"], info["completed"] = ran, len(failed), completed
            store.add_invocation(info)
    return BenchResult(out, suite.name, len(cells), len(cells) - len(pending), ran, failed,
                       time.perf_counter() - t0, table)
