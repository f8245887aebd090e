"""The ``open`` command (and the interactive ``demo``): start the investigation workspace.

Mirrors investigator/review/commands.py: ``add_tui_commands(subparsers)`` adds the parsers and returns the
handlers for the CLI's table. Textual is imported only when the UI starts.
"""

from __future__ import annotations

import argparse
from collections.abc import Callable
from pathlib import Path


def add_tui_commands(subparsers) -> dict[str, Callable[[argparse.Namespace], int]]:
    from ..cli import _add_scan_options  # the same options as scan, so the same flags give the same result

    p = subparsers.add_parser(
        "open", help="open DATA in the investigation workspace (a terminal UI)",
        description="Open DATA in the terminal UI: choose the features, run the scan, go through the cases, "
        "drill into a record, look at the map and record verdicts. Takes the same options as scan.")
    p.add_argument("data", metavar="DATA", help="CSV/TSV, Parquet or XLSX file")
    _add_scan_options(p)
    p.add_argument("--store", metavar="PATH", help="the review store (default: DATA.investigation.sqlite)")
    p.add_argument("--scan", action="store_true", help="start the scan at once instead of on the Columns screen")
    return {"open": cmd_open}


def cmd_open(args: argparse.Namespace) -> int:
    from ..cli import _options
    from .app import InvestigatorApp

    # A dict, not ScanOptions: it is validated in the load worker (a bad option shows as a one-line error
    # in the UI), because importing the options module pulls in SciPy and would delay the first frame.
    options = {k: v for k, v in _options(args).items() if v is not None}
    InvestigatorApp(args.data, options, autoscan=args.scan, store=args.store).run()
    return 0


def open_demo(path: Path, args: argparse.Namespace) -> int:
    """The interactive ``investigator demo``: the demo data, scanned at once, in the workspace."""
    from ..demo import DEMO_ID
    from .app import InvestigatorApp

    InvestigatorApp(path, {"id": DEMO_ID, "seed": args.seed}, autoscan=True).run()
    return 0
