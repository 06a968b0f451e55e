"""Finished agent cells that were trained under other settings than an agent would get today.

A cell's id hashes its suite entry (agent, steps, the settings the suite names), not the
defaults written in the code. When a default changes after a cell ran (a new setting, a new
value), the id stays the same and a resumed run would count the old cell as done. Each agent
cell records the settings it really used in `agents/ID/train.json`; this module compares them
with what the same entry resolves to now. The bench warns about such cells and keeps them
(they may hold hours of training); `--rerun-stale` moves them into `stale/` and runs them again.
"""
from __future__ import annotations

import datetime as _dt
import json
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Iterable, Mapping

from invbench.envs.errors import SpecError

from .cell import agent_settings

#: Settings that only change what is shown, never a result.
DISPLAY_ONLY = ("progress",)
ABSENT = "(absent)"
STALE_DIR = "stale"


@dataclass(frozen=True)
class StaleCell:
    """One finished agent cell and the settings that differ: name -> (recorded, today)."""

    cell_id: str
    label: str
    agent: str
    changes: Mapping[str, tuple[Any, Any]]

    def to_dict(self) -> dict[str, Any]:
        return {"cell_id": self.cell_id, "label": self.label, "agent": self.agent,
                "changes": {k: list(v) for k, v in self.changes.items()}}


def today_settings(policy: Mapping[str, Any]) -> tuple[dict[str, Any], frozenset[str]]:
    """The settings an agent entry (`PolicyEntry.to_dict()`) resolves to with today's code, and
    the names of settings its agent does not use (other agents' settings share the class)."""
    from invbench.agents.settings import field_meta, to_jsonable
    from invbench.agents.training import resolve_settings

    agent = policy["agent"]
    resolved = resolve_settings(agent, agent_settings(policy))
    unused = frozenset(k for k, m in field_meta(type(resolved)).items() if m["agents"] and agent not in m["agents"])
    return to_jsonable(resolved), unused


def _canon(value: Any) -> str:
    return json.dumps(value, sort_keys=True, default=str)


def settings_changes(recorded: Mapping[str, Any], today: Mapping[str, Any],
                     ignore: Iterable[str] = ()) -> dict[str, tuple[Any, Any]]:
    """name -> (recorded value, today's value) for every setting that differs."""
    skip = set(DISPLAY_ONLY) | set(ignore)
    out = {}
    for key in sorted(set(recorded) | set(today)):
        if key in skip:
            continue
        old, new = recorded.get(key, ABSENT), today.get(key, ABSENT)
        if _canon(old) != _canon(new):
            out[key] = (old, new)
    return out


def recorded_run(root: Path, cell_id: str) -> tuple[dict[str, Any], dict[str, Any]] | None:
    """The settings and the resolved scaling in `agents/ID/train.json` (scaling {} when not
    recorded), or None when there is no readable record of the settings."""
    try:
        data = json.loads((root / "agents" / cell_id / "train.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    settings = data.get("settings") if isinstance(data, dict) else None
    if not isinstance(settings, dict):
        return None
    scaling = data.get("scaling")
    return settings, scaling if isinstance(scaling, dict) else {}


def same_floor(spec: Any, today: Any, scaling: Mapping[str, Any]) -> bool:
    """Whether today's `position_floor` setting gives the floor the cell trained with.

    Why: the setting acts on training only through the floor it resolves to for the instance,
    and that is none wherever unmet demand is lost (`agents/scaling.position_floor_for`), so a
    cell trained before the setting existed is stale only where a floor now applies."""
    from invbench.agents.scaling import resolved_floor

    try:
        cap = int(scaling.get("position_cap", 0))
    except (TypeError, ValueError):
        return False
    return resolved_floor(spec, bool(today), cap) == scaling.get("position_floor")


#: settings judged by their effect on the instance rather than their value (see `same_floor`)
EFFECT_CHECKS: dict[str, Callable[[Any, Any, Mapping[str, Any]], bool]] = {"position_floor": same_floor}


def find_stale(cells: Iterable[Any], done: Mapping[str, Any], root: str | Path) -> list[StaleCell]:
    """Finished agent cells among `cells` whose recorded settings differ from today's.

    Cells without a readable `train.json` cannot be judged and are left alone."""
    root = Path(root)
    today: dict[str, tuple[dict[str, Any], frozenset[str]] | None] = {}
    out = []
    for c in cells:
        if c.policy.kind != "agent" or c.cell_id not in done:
            continue
        run = recorded_run(root, c.cell_id)
        if run is None:
            continue
        recorded, scaling = run
        entry = c.policy.to_dict()
        key = _canon(entry)
        if key not in today:
            try:
                today[key] = today_settings(entry)
            except SpecError:  # an entry today's code refuses: its cells fail when run, not here
                today[key] = None
        if today[key] is None:
            continue
        changes = settings_changes(recorded, *today[key])
        for name in [k for k in changes if k in EFFECT_CHECKS]:
            if EFFECT_CHECKS[name](c.instance, changes[name][1], scaling):
                del changes[name]
        if changes:
            out.append(StaleCell(c.cell_id, c.policy.label, c.policy.agent, changes))
    return out


def _show(value: Any) -> str:
    return value if value == ABSENT else _canon(value)


def warning_lines(stale: list[StaleCell]) -> list[str]:
    """One line per policy entry, naming the changed settings (at most 4 shown)."""
    groups: dict[str, list[StaleCell]] = {}
    for s in stale:
        groups.setdefault(s.label, []).append(s)
    lines = []
    for label, items in groups.items():
        changes: dict[str, tuple[Any, Any]] = {}
        for s in items:
            changes.update(s.changes)
        shown = ", ".join(f"{k}: {_show(a)} -> {_show(b)}" for k, (a, b) in list(changes.items())[:4])
        more = f" and {len(changes) - 4} more" if len(changes) > 4 else ""
        n = len(items)
        lines.append(f"invbench: warning: {n} finished {label!r} cell{'s' if n != 1 else ''} "
                     f"{'were' if n != 1 else 'was'} trained under other settings than today's "
                     f"({shown}{more}); kept as done; --rerun-stale trains "
                     f"{'them' if n != 1 else 'it'} again (the old results move to {STALE_DIR}/)")
    return lines


def move_stale(root: str | Path, stale: list[StaleCell], warn: Callable[[str], None] | None = None) -> None:
    """Move each stale cell's file and trained policy into `stale/`, logged; nothing is deleted."""
    root = Path(root)
    target = root / STALE_DIR
    stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y%m%dT%H%M%S%fZ")
    for s in stale:
        (target / "agents").mkdir(parents=True, exist_ok=True)
        name = f"{s.cell_id}-{stamp}"
        # The record first: a run killed between the two moves then reruns the cell (at worst
        # the old policy's folder is replaced); the other order could leave a cell counted as
        # done with no train.json, which no later check could flag.
        cell = root / "cells" / f"{s.cell_id}.json"
        if cell.exists():
            os.replace(cell, target / f"{name}.json")
        agents = root / "agents" / s.cell_id
        if agents.exists():
            os.replace(agents, target / "agents" / name)
        with open(target / "log.txt", "a", encoding="utf-8") as f:
            f.write(f"{name}\t{s.label}\t{json.dumps(s.to_dict()['changes'], default=str)}\n")
    if stale and warn is not None:
        warn(f"invbench: {len(stale)} cell(s) trained under other settings moved to {target}; they run again")
