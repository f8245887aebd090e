"""The ``explain`` command: scan DATA and explain one record in words."""

from __future__ import annotations

import argparse
from collections.abc import Callable

from investigator.cli.echo import echo
from investigator.cli.options import add_reference_options, add_scan_options, run_engine, scan_parameters
from investigator.output.explanation import explanation_text
from investigator.progress import StderrBar


def register(sub) -> dict[str, Callable[[argparse.Namespace], int]]:
    explain = sub.add_parser("explain", help="explain why one record stands out",
                             description="Scan DATA and explain one record: which features made it stand "
                             "out and in which direction, its peers, what would make it ordinary. With "
                             "--reference, the record is judged against the reference's fit, as check does.")
    explain.add_argument("data", metavar="DATA", help="CSV/TSV, Parquet or XLSX file")
    which = explain.add_mutually_exclusive_group(required=True)
    which.add_argument("--row", metavar="N", type=int, help="the record's 1-based data row")
    which.add_argument("--key", metavar="K", help="the record's key (the --id column's value)")
    add_reference_options(explain)
    add_scan_options(explain)
    explain.add_argument("--peers", metavar="K", type=int, default=5, help="peers to show (default 5)")
    return {"explain": run_explain}


def run_explain(args: argparse.Namespace) -> int:
    # Deferred: the options' import costs 1.7 s (SciPy; see investigator/cli/scan.py).
    from investigator.pipeline.options import ScanOptions

    result = run_engine(args, ScanOptions(**scan_parameters(args)), StderrBar())
    echo(explanation_text(result.explain(row=args.row, key=args.key, peers=args.peers)))
    return 0
