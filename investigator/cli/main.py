"""Command line: the parser, the dispatch to one module per command, and the exit codes.

Exit codes: 0 done, 2 bad input or usage (one line naming the file/column and the fix), 1 internal error,
130 interrupted. Each command module (scan, explain, map, demo, review, open, report) adds its parsers with
``register(subparsers)`` and returns its handlers; the work is done by the engine.
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Callable

from investigator.cli import demo, explain, report, review, scan
from investigator.cli import map as map_command
from investigator.cli import open as open_command
from investigator.cli.echo import echo
from investigator.cli.options import Parser, flag_message
from investigator.errors import InputError
from investigator.printable import printable
from investigator.version import __version__

DESCRIPTION = (
    "Find the records in a table that do not fit with the rest, and say why. "
    "Flags are leads for a person to review, not proof of error or fraud."
)

# In the order `investigator --help` lists them.
COMMAND_MODULES = (scan, map_command, explain, demo, review, open_command, report)


def build_parser() -> tuple[argparse.ArgumentParser, dict[str, Callable[[argparse.Namespace], int]]]:
    """The parser and the handler of each command."""
    parser = Parser(prog="investigator", description=DESCRIPTION)
    parser.add_argument("--version", action="version", version=f"investigator {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=Parser)
    handlers: dict[str, Callable[[argparse.Namespace], int]] = {}
    for module in COMMAND_MODULES:
        handlers.update(module.register(sub))
    return parser, handlers


def main(argv: list[str] | None = None) -> int:
    parser, handlers = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    try:
        return handlers[args.command](args)
    except InputError as exc:
        # The engine names its parameters as the API spells them; here they are the flags (--cutoff 1.5).
        # Always one line, and names from the data cannot drive the terminal: line breaks and controls escaped.
        echo(f"investigator {args.command}: error: {printable(flag_message(exc))}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("investigator: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:  # output piped into e.g. `head`, which stopped reading: not an error
        sys.stderr.close()
        return 0
    except Exception as exc:  # an internal error: one line, the traceback only on request
        if os.environ.get("INVESTIGATOR_DEBUG"):
            raise
        echo(
            f"investigator {args.command}: internal error: {type(exc).__name__}: {printable(exc)} "
            "(set INVESTIGATOR_DEBUG=1 to see the traceback, and please report it)",
            file=sys.stderr,
        )
        return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
