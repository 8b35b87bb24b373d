"""The ``airhealth`` command: one sub-command per module in this package.

Each command module exposes ``register(subparsers)``, which adds its parser and sets ``func`` to a
callable taking the parsed arguments and returning an exit code.
"""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

from .. import __version__
from ..errors import AirhealthError
from .remedies import with_command_line_remedy

COMMANDS = ("report", "fit", "compare", "sensitivity", "align", "daily", "demo", "burden", "fit-cities", "pool")


def build_parser() -> argparse.ArgumentParser:
    """Return the top-level argument parser with every available sub-command."""
    parser = argparse.ArgumentParser(
        prog="airhealth",
        description="Short-term health effects of air pollution from daily time series.",
    )
    parser.add_argument("--version", action="version", version=f"airhealth {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        module_name = f"airhealth.cli.{name.replace('-', '_')}"  # fit-cities -> fit_cities
        try:
            module = importlib.import_module(module_name)
        except ModuleNotFoundError as exc:  # a command still being built
            if exc.name != module_name:
                raise
            continue
        module.register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the console script; returns the process exit code."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    try:
        return int(args.func(args) or 0)
    except AirhealthError as exc:
        print(f"airhealth {args.command}: error: {with_command_line_remedy(str(exc))}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into a program that stopped reading (e.g. head)
        sys.stderr.close()
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
