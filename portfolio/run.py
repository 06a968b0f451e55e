"""`run_portfolio`: the whole portfolio job. Stage 1 ("choice") finds per item the optimum where
tractable and the best classical policy (optionally an agent); stage 2 ("robustness") measures
each item's chosen policy on its alternative demand laws against their own optima. Both stages
are suites run by the bench driver, so an interrupted run resumes where it stopped.
"""
from __future__ import annotations

import contextlib
import json
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

import pandas as pd

from invbench.experiments.runner import BenchResult, run_bench
from invbench.experiments.store import atomic_write, to_jsonable

from .alternatives import KINDS, Alternative, alternatives_for
from .items import PortfolioItem
from .suites import choice_suite, classical_policies, robustness_suite, suite_name
from .tables import choice_table, robustness_table, write_table

CHOICE_DIR, ROBUSTNESS_DIR = "choice", "robustness"
#: Files a run writes at the top of its folder (checked before any work starts).
OUTPUT_FILES = ("portfolio.csv", "portfolio.parquet", "robustness.csv", "robustness.parquet", "summary.json")
OUTPUT_DIRS = (CHOICE_DIR, ROBUSTNESS_DIR)
#: Default size of the state space up to which an exact optimum is computed.
DEFAULT_MAX_STATES = 500_000


@dataclass
class PortfolioResult:
    """What a portfolio run did and found; tables are also written to `out`."""

    out: Path
    name: str
    choice: pd.DataFrame = field(repr=False)
    robustness: pd.DataFrame = field(repr=False)
    stages: dict[str, dict[str, Any]]
    item_notes: dict[str, list[str]]
    left_out: list[str]
    policies: list[str]
    settings: dict[str, Any]
    seconds: float
    failed: list[str] = field(default_factory=list)

    @property
    def items(self) -> int:
        return len(self.choice)

    def to_dict(self) -> dict[str, Any]:
        return to_jsonable({"out": str(self.out), "name": self.name, "items": self.items,
                            "stages": self.stages, "policies": self.policies, "settings": self.settings,
                            "left_out": self.left_out, "item_notes": self.item_notes,
                            "seconds": self.seconds, "failed": self.failed})


@contextlib.contextmanager
def _cell_lines_to(log: Path) -> Any:
    """The bench driver prints one line per finished cell: for thousands of cells they go to a
    log file, and the console keeps the progress bar and the summary."""
    log.parent.mkdir(parents=True, exist_ok=True)
    with open(log, "a", encoding="utf-8") as f, contextlib.redirect_stdout(f):
        yield


def _stage(suite: Any, out: Path, run: Mapping[str, Any]) -> BenchResult:
    with _cell_lines_to(out / "cells.log"):
        return run_bench(suite, out, **run)


def run_portfolio(items: Sequence[PortfolioItem], out: str | Path, *, histories: Mapping[str, Any] | None = None,
                  name: str = "portfolio", policies: Sequence[str] | None = None, agent: Mapping[str, Any] | None = None,
                  max_states: int = DEFAULT_MAX_STATES, robustness: bool = True, kinds: tuple[str, ...] = KINDS,
                  variance_factor: float = 2.0, replicates: int = 3, seed: int = 0, backend: str = "local",
                  workers: int | None = None, address: str | None = None, progress: bool = True,
                  command: list[str] | None = None) -> PortfolioResult:
    """Run a portfolio into `out` (resuming what a previous run of the same items left there).
    `histories`: item -> ItemHistory (from `invbench.fitting.read_sales`), needed for the
    other-family and bootstrap alternatives."""
    from tqdm import tqdm

    t0 = time.perf_counter()
    out = Path(out)
    name = suite_name(name)
    specs = [it.spec for it in items]
    names = classical_policies(policies, {s.model for s in specs})
    run = {"backend": backend, "workers": workers, "address": address, "progress": progress,
           "command": command if command is not None else list(sys.argv)}
    settings = {"max_states": max_states, "variance_factor": variance_factor, "bootstrap": replicates,
                "seed": seed, "alternatives": list(kinds) if robustness else [], "agent": dict(agent or {}),
                "backend": backend}
    suite, no_opt = choice_suite(name, specs, names, max_states, seed, agent,
                                 description=f"portfolio of {len(specs)} items: choice of policy")
    first = _stage(suite, out / CHOICE_DIR, run)
    choice = choice_table(specs, first.table, no_opt)
    notes: dict[str, list[str]] = {k: [f"optimum: {v}"] for k, v in no_opt.items()}
    stages = {CHOICE_DIR: first.to_dict()}
    failed = list(first.failed)
    alts: list[Alternative] = []
    robust = pd.DataFrame()
    left_out: list[str] = []
    if robustness:
        ok = choice[choice["status"] == "ok"]
        picks = {}
        by_name = {s.label: s for s in specs}
        for r in tqdm(list(ok.itertuples()), desc="alternatives", unit="item", disable=None if progress else True,
                      dynamic_ncols=True, leave=False):
            spec = by_name[r.item]
            got, why = alternatives_for(spec, r.item, (histories or {}).get(r.item), variance_factor=variance_factor,
                                        replicates=replicates, seed=seed, kinds=kinds)
            alts += got
            if why:
                notes.setdefault(r.item, []).extend(why)
            picks[r.item] = (spec, r.policy, json.loads(r.params))
        suite2, refused = robustness_suite(f"{name}-robustness", picks, alts, max_states,
                                           description=f"portfolio of {len(specs)} items: robustness of the choice")
        for label, why in refused.items():
            item = label.split("~", 1)[0]
            notes.setdefault(item, []).append(f"{label.split('~', 1)[-1]}: optimum out of reach ({why})")
        if suite2.pairs:
            second = _stage(suite2, out / ROBUSTNESS_DIR, run)
            stages[ROBUSTNESS_DIR] = second.to_dict()
            failed += second.failed
            robust = robustness_table(alts, second.table, choice, refused)
        else:
            robust = robustness_table(alts, pd.DataFrame(), choice, refused)
        if histories is None:
            left_out.append("other_family, bootstrap: no sales history given (--sales)")
    res = PortfolioResult(out, name, choice, robust, stages, notes, left_out, names, settings,
                          time.perf_counter() - t0, failed)
    write_table(choice, out / "portfolio.csv")
    if robustness:
        write_table(robust, out / "robustness.csv")
    atomic_write(out / "summary.json", json.dumps(res.to_dict(), indent=1, sort_keys=True))
    return res
