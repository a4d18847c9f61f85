"""Argument parsing and dispatch for the `vetting` command.

Global options (`--db URL`) come before the command: `vetting --db URL import FILE`.
Exit status: 0 success, 2 bad input or usage, 1 other failures; messages go to stderr.
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil
import sys
from dataclasses import dataclass

from vetting import __version__
from vetting.cli import commands
from vetting.cli.common import EXIT_BAD_INPUT, EXIT_FAILURE, CommandError, err


@dataclass
class OpenInterface:
    """Returned by a command that wants the terminal interface opened on a database."""

    url: str


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # usage errors: exit 2 with a clear message
        self.print_usage(sys.stderr)
        err(f"vetting: error: {message}")
        raise SystemExit(EXIT_BAD_INPUT)


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="vetting",
        description="Choose off-the-shelf employment tests for a job and defend the choice.",
    )
    parser.add_argument("--version", action="version", version=f"vetting {__version__}")
    parser.add_argument(
        "--db",
        metavar="URL",
        default=None,
        help="SQLAlchemy database URL (default: $VETTING_DB, else a SQLite file in your data directory)",
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for info in sorted(pkgutil.iter_modules(commands.__path__), key=lambda m: m.name):
        module = importlib.import_module(f"{commands.__name__}.{info.name}")
        register = getattr(module, "register", None)
        if register is not None:
            register(sub)
    return parser


def run(argv: list[str] | None = None) -> int | OpenInterface:
    """Parse and run one command. Returns an exit status, or OpenInterface."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        from vetting.records.location import resolve_url

        return OpenInterface(resolve_url(args.db))
    try:
        return args.func(args)
    except CommandError as exc:
        err(f"vetting: {exc.message}")
        return exc.status
    except KeyboardInterrupt:
        err("vetting: interrupted")
        return EXIT_FAILURE
