"""A small watcher that ends a driver's helper processes when the driver dies without cleaning up.

A private Ray instance is started by the driver (`bench --backend ray` without `--address`).
When the driver is killed outright (SIGKILL, out of memory), Ray's own fate sharing stops most
of it, but some of its node agents are re-parented and keep running (seen with Ray 2.x: the
dashboard and runtime-env agents). This watcher runs as its own process, notes every descendant
of the driver twice a second, and once the driver is gone kills those that are still the same
processes (same start time). It exits with the driver, so it outlives it by at most a moment.

    python -m invbench.experiments.reaper DRIVER_PID
"""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

POLL_SECONDS = 0.5
PROC = Path("/proc")


def _table() -> dict[int, tuple[int, str]]:
    """pid -> (parent pid, start time) of every live, non-zombie process (Linux /proc)."""
    out: dict[int, tuple[int, str]] = {}
    for d in PROC.iterdir():
        if not d.name.isdigit():
            continue
        try:
            fields = (d / "stat").read_text().rsplit(")", 1)[1].split()
        except OSError:  # ended while we looked
            continue
        if fields[0] != "Z":
            out[int(d.name)] = (int(fields[1]), fields[19])  # ppid, starttime (stat fields 4, 22)
    return out


def descendants(table: dict[int, tuple[int, str]], root: int) -> dict[int, str]:
    """pid -> start time of every descendant of `root` in `table`."""
    children: dict[int, list[int]] = {}
    for pid, (ppid, _) in table.items():
        children.setdefault(ppid, []).append(pid)
    found: dict[int, str] = {}
    todo = [root]
    while todo:
        for child in children.get(todo.pop(), []):
            if child not in found:
                found[child] = table[child][1]
                todo.append(child)
    return found


def watch(driver: int) -> int:
    """Follow `driver` until it ends; then kill what it left running. Returns how many."""
    table = _table()
    if driver not in table:
        return 0
    driver_start = table[driver][1]
    seen: dict[int, str] = {}
    while True:
        table = _table()
        alive = driver in table and table[driver][1] == driver_start
        if not alive:
            break
        seen.update(descendants(table, driver))
        seen.pop(os.getpid(), None)
        time.sleep(POLL_SECONDS)
    killed = 0
    for pid, start in seen.items():
        if pid in table and table[pid][1] == start:
            try:
                os.kill(pid, signal.SIGKILL)
                killed += 1
            except OSError:
                pass
    return killed


def start_reaper() -> subprocess.Popen | None:
    """Start the watcher for this process (Linux only; elsewhere nothing is started)."""
    if not PROC.joinpath("self").is_dir():
        return None
    # Its own session: a Ctrl-C sent to the driver's terminal group does not stop it early.
    return subprocess.Popen([sys.executable, "-m", "invbench.experiments.reaper", str(os.getpid())],
                            stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True)


if __name__ == "__main__":  # pragma: no cover (run as a process by start_reaper)
    watch(int(sys.argv[1]))
