"""Command line: a thin dispatcher over the Python API.

Each subcommand lives in ``lakebalance.commands.<name>`` and exposes ``HELP``,
``add_arguments(parser)`` and ``run(args) -> int``; those modules import only the standard library at
top level, so that ``lakebalance --help`` stays fast.

Exit codes: 0 success; 2 unusable input or site file (one line ``error: ...`` on stderr); 1 a bug.
"""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

from . import __version__

__all__ = ["main", "COMMANDS"]

#: Command names whose module is named otherwise (``yield`` is a Python keyword).
MODULES = {"yield": "yield_"}

#: Subcommands in the order ``--help`` lists them.
COMMANDS = (
    "check",
    "storage",
    "rating",
    "evaporation",
    "balance",
    "dynamics",
    "flags",
    "seepage",
    "drawdown",
    "yield",
    "hindcast",
    "report",
    "demo",
)


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="lakebalance",
        description="Daily water balance of a lake or reservoir from its gauge records.",
        epilog="Run 'lakebalance COMMAND --help' for the options of a command.",
    )
    parser.add_argument("--version", action="version", version=f"lakebalance {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        path = f"lakebalance.commands.{MODULES.get(name, name)}"
        try:
            module = importlib.import_module(path)
        except ModuleNotFoundError as exc:
            if exc.name != path:
                raise
            continue
        p = sub.add_parser(name, help=module.HELP, description=module.HELP)
        module.add_arguments(p)
        p.set_defaults(_run=module.run)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``lakebalance`` command; returns the exit code."""
    parser = _parser()
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help()
        return 0
    from .errors import LakebalanceError

    try:
        return int(args._run(args) or 0)
    except LakebalanceError as exc:
        print(exc.one_line(), file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("error: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
