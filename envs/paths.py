"""Checks of output paths before a command starts any work: a folder where a folder is needed,
a file where a file is needed, nothing in the way, and a place this user can write to.

Each problem is a one-line SpecError naming the option, so a mistyped `--out` costs seconds,
not the hours of a run that fails at its first write.
"""
from __future__ import annotations

import tempfile
from pathlib import Path
from typing import Iterable

from invbench.envs.errors import SpecError


def _nearest_existing(p: Path) -> Path:
    for q in (p, *p.parents):
        if q.exists():
            return q
    return Path("/")


def _probe(folder: Path, field: str, target: Path) -> None:
    """Create and remove a temp file in `folder`: the only sure test of writing (root, ACLs,
    read-only mounts all answer here)."""
    try:
        with tempfile.TemporaryFile(dir=folder):
            pass
    except OSError as e:
        raise SpecError(f"{field}: cannot write {target} ({folder}: {e.strerror or e}); choose a "
                        f"writable place") from None


def _reachable(p: Path, field: str) -> Path:
    """The nearest existing ancestor of `p`, refusing when it is a file (p cannot be created)."""
    base = _nearest_existing(p)
    if base != p and not base.is_dir():
        raise SpecError(f"{field}: {p} cannot be created because {base} is a file, not a folder")
    return base


def check_output_dir(path: str | Path, field: str, subdirs: Iterable[str] = (),
                     files: Iterable[str] = ()) -> Path:
    """A folder that exists or can be created and written; `subdirs` / `files` inside it must not
    be in the way (a file where a folder goes, or a folder where a file goes)."""
    p = Path(path).expanduser()
    if p.exists() and not p.is_dir():
        raise SpecError(f"{field}: {p} is an existing file; give a folder (it is created when missing)")
    base = _reachable(p, field)
    for name in subdirs:
        q = p / name
        if q.exists() and not q.is_dir():
            raise SpecError(f"{field}: {q} is a file where the results need a folder; move it away")
    for name in files:
        q = p / name
        if q.is_dir():
            raise SpecError(f"{field}: {q} is a folder where a file is written; move it away")
    _probe(p if p.is_dir() else base, field, p)
    return p


def check_output_file(path: str | Path, field: str, suffixes: tuple[str, ...] = ()) -> Path:
    """A file path that can be written: not a folder, not under a file, in a writable folder."""
    p = Path(path).expanduser()
    if p.is_dir() or str(path).endswith(("/", "\\")):
        raise SpecError(f"{field}: {p} is a folder; give a file path")
    if suffixes and p.suffix.lower() not in suffixes:
        raise SpecError(f"{field}: must end in {' or '.join(suffixes)}, got {p.name!r}")
    base = _reachable(p.parent, field)
    _probe(p.parent if p.parent.is_dir() else base, field, p)
    return p
