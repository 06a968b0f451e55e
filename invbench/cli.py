"""Command line: `invbench solve|evaluate|policies|demo|...`.

Bad input of any kind ends with one line on stderr naming the field and exit code 2. Each part
keeps its own commands in a module listed in `COMMAND_MODULES`, whose `register(subparsers)`
adds its parsers and sets `func` on them.
"""
from __future__ import annotations

import argparse
import importlib
import os
import sys
from typing import Sequence

from invbench.envs.errors import BudgetError, SpecError

COMMAND_MODULES = ("invbench.commands", "invbench.agents.cli", "invbench.experiments.cli", "invbench.fitting.cli",
                  "invbench.service.cli", "invbench.portfolio.cli")


class _UsageError(Exception):
    """A bad command line; `main` prints it as one line and returns 2."""


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # one line, exit 2, as for every other bad input
        raise _UsageError(f"{self.prog}: error: {message}")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="invbench", description="Inventory-control bench: exact optima, classical policies, RL agents.")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for mod in COMMAND_MODULES:
        importlib.import_module(mod).register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except _UsageError as e:
        sys.stderr.write(f"{e}\n")
        return 2
    from invbench.envs.demand import DEFAULT_MAX_SUPPORT, support_limit
    try:
        with support_limit(getattr(args, "max_demand_support", DEFAULT_MAX_SUPPORT)):
            code = int(args.func(args) or 0)
            sys.stdout.flush()  # inside the try: a closed pipe is reported here, not at exit
            return code
    except (SpecError, BudgetError) as e:
        sys.stderr.write(f"invbench: error: {e}\n")
        return 2
    except KeyboardInterrupt:
        sys.stderr.write("invbench: interrupted\n")
        return 130
    except BrokenPipeError:
        return _reader_gone()


def _reader_gone() -> int:
    """The reader of stdout closed early (`invbench ... | head`): stop quietly, as Unix tools do.

    Python's documented recipe (library/signal, "Note on SIGPIPE"): point stdout at devnull so
    the interpreter's final flush does not raise again; exit status 141 = 128 + SIGPIPE, as a
    shell reports for a tool killed by that signal. Files already written stay written.
    """
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):  # stdout without a file descriptor (tests capturing it)
        pass
    return 141


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
