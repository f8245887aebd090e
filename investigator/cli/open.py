"""The ``open`` command (and the interactive ``demo``): start the investigation workspace."""

from __future__ import annotations

import argparse
from collections.abc import Callable
from pathlib import Path

from investigator.cli.options import (
    add_column_options,
    add_learn_option,
    add_reference_options,
    add_scan_options,
    cache_choice,
    check_reference_options,
    column_choice,
    flag_message,
    scan_parameters,
)
from investigator.errors import InputError


def register(sub) -> dict[str, Callable[[argparse.Namespace], int]]:
    p = sub.add_parser(
        "open", help="open DATA in the investigation workspace (a terminal UI)",
        description="Open DATA in the terminal UI: choose the features, run the scan, go through the cases, "
        "drill into a record, look at the map and record verdicts. Takes the same options as scan; with "
        "--reference, the records are scored against the reference as check does.")
    p.add_argument("data", metavar="DATA", help="CSV/TSV, Parquet or XLSX file")
    add_reference_options(p)
    add_scan_options(p)  # the same options as scan, so the same flags give the same result
    p.add_argument("--store", metavar="PATH", help="the review store (default: DATA.investigation.sqlite, or "
                   "the store of the same records under another name in its folder)")
    add_learn_option(p)
    p.add_argument("--scan", action="store_true", help="start the scan at once instead of on the Columns screen")
    add_column_options(p, "the Cases list shows", "the Cases list starts filtered by it (w changes it)")
    return {"open": run_open}


def run_open(args: argparse.Namespace) -> int:
    # Textual is imported only when the UI starts (0.6 s; `investigator --help` takes 0.09 s). The options
    # stay a dict, validated in the load worker (a bad option shows as a one-line error in the UI), because
    # importing the options module pulls in SciPy and would delay the first frame.
    from investigator.tui.app import InvestigatorApp

    check_reference_options(args)
    if args.reference is not None and not Path(args.reference).is_file():  # before the UI: no box to fix it there
        raise InputError(f"--reference {args.reference}: no such file; check the path")
    InvestigatorApp(args.data, scan_parameters(args), autoscan=args.scan, store=args.store,
                    reference=args.reference, reference_sheet=args.reference_sheet, error_text=flag_message,
                    columns=column_choice(args), where=args.where, learn=args.learn,
                    cache=cache_choice(args)).run()
    return 0


def open_demo(path: Path, options: dict) -> int:
    """The interactive ``investigator demo``: the demo data, scanned at once with ``options``, in the workspace."""
    from investigator.tui.app import InvestigatorApp  # deferred, as in run_open

    InvestigatorApp(path, options, autoscan=True, error_text=flag_message).run()
    return 0
