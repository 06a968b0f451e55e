"""SIGTERM treated like Ctrl-C during a bench run, and a guard that lets the results be written
before either one takes effect.

`stop_on_sigterm()` (used by the CLI) turns SIGTERM into `Terminated`, a KeyboardInterrupt, so
every cleanup written for Ctrl-C (stopping workers, writing the table) also runs on SIGTERM.
`finish_first()` (used by the runner around its final writes) defers either signal to its end.
"""
from __future__ import annotations

import signal
import sys
import threading
from contextlib import contextmanager
from typing import Any, Iterator


class Terminated(KeyboardInterrupt):
    """The process was asked to stop with SIGTERM."""


_pending: list[BaseException] = []
_depth = [0]


def _raise(exc: BaseException) -> None:
    if _depth[0] > 0:
        if not _pending:
            _pending.append(exc)
        return
    raise exc


def _on_sigterm(signum: int, frame: Any) -> None:
    _raise(Terminated())


def _on_sigint(signum: int, frame: Any) -> None:
    _raise(KeyboardInterrupt())


def _main_thread() -> bool:
    return threading.current_thread() is threading.main_thread()


@contextmanager
def stop_on_sigterm() -> Iterator[None]:
    """Inside: SIGTERM raises Terminated and Ctrl-C raises KeyboardInterrupt (both deferrable)."""
    if not _main_thread():  # signal handlers can only be set from the main thread
        yield
        return
    old_term = signal.signal(signal.SIGTERM, _on_sigterm)
    old_int = signal.signal(signal.SIGINT, _on_sigint) if signal.getsignal(signal.SIGINT) is signal.default_int_handler else None
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, old_term)
        if old_int is not None:
            signal.signal(signal.SIGINT, old_int)
        _pending.clear()


@contextmanager
def finish_first() -> Iterator[None]:
    """A SIGTERM or Ctrl-C arriving inside takes effect when the block is done, so the writes
    inside are not cut short; one arriving earlier (already raised) is not affected."""
    _depth[0] += 1
    try:
        yield
    finally:
        _depth[0] -= 1
        if _depth[0] == 0 and _pending:
            exc = _pending.pop()
            _pending.clear()
            if sys.exc_info()[0] is None:  # else the exception on its way out says enough
                raise exc
