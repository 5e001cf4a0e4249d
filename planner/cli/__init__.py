"""Command-line interface: ``hiplan <command> ...``.

Each command is a module in this package (``NAME``, ``HELP``, ``add_arguments``,
``run``); this file builds the parser and turns ``UserError`` into one line on
stderr with exit status 2. Nothing is written when a command fails.
"""
from __future__ import annotations

import argparse
import logging
import sys

from .. import __version__
from ..errors import UserError
from . import (brief, calendar, crossings, demo, drive, lsr, month, network, park, planlog, sites, spectrum,
               survey, tally, tune)
from .common import Parser, TerminalConsole

COMMAND_MODULES = (demo, park, month, network, survey, calendar, brief, planlog, tally, crossings, lsr,
                   tune, spectrum, drive, sites)
COMMANDS = {m.NAME: m.run for m in COMMAND_MODULES}


def build_parser() -> argparse.ArgumentParser:
    parser = Parser(prog="hiplan", description="Plan 21-cm HI observations for small radio telescopes.")
    parser.add_argument("--version", action="version", version=f"hiplan {__version__}")
    parser.add_argument("--verbose", "-v", action="store_true", help="log notes (e.g. IERS table end)")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=Parser)
    for module in COMMAND_MODULES:
        module.add_arguments(sub.add_parser(module.NAME, help=module.HELP))
    return parser


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``hiplan`` console script; returns the exit status."""
    console = TerminalConsole()
    try:
        parser = build_parser()
        args = parser.parse_args(argv)
        logging.basicConfig(level=logging.INFO if args.verbose else logging.WARNING,
                            format="hiplan: note: %(message)s")
        if not args.command:
            parser.print_help()
            return 2
        return COMMANDS[args.command](args, console)
    except UserError as exc:
        # One line, whatever the message carries (e.g. a newline typed into an option).
        line = " ".join(str(exc).split("\n"))
        sys.stdout.flush()
        sys.stderr.write(f"hiplan: error: {line}\n")
        return 2
    except KeyboardInterrupt:
        sys.stderr.write("hiplan: interrupted\n")
        return 130
