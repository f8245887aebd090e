"""The ``report`` command: scan DATA and write the report (HTML) or the cases table (XLSX, CSV).

Everything that can be checked before the scan (the output path, --cases, --store) is checked first, so a
mistake costs no scan time. The review store is only read.
"""

from __future__ import annotations

import argparse
from collections.abc import Callable
from pathlib import Path

from investigator.cli.echo import echo
from investigator.cli.options import (
    add_column_options,
    add_learn_option,
    add_reference_options,
    add_scan_options,
    check_reference_options,
    check_where,
    column_choice,
    output_checks,
    refuse_overwrite,
    run_engine,
    scan_parameters,
)
from investigator.errors import InputError
from investigator.progress import StderrBar
from investigator.report import DEFAULT_CASES, check_report_path, write_report


def register(subparsers) -> dict[str, Callable[[argparse.Namespace], int]]:
    """Add ``report`` to an argparse subparsers object; return its handler."""
    p = subparsers.add_parser(
        "report", help="write a report someone can sign off (HTML), or the cases table (XLSX, CSV)",
        description="Scan DATA and write one self-contained HTML report (summary first: what was scanned, "
        "how, what was found, the cases with their explanations, verdicts and notes with their history, "
        "cautions), or with --out cases.xlsx / cases.csv the cases table with explanations and verdicts. "
        "With --reference, the records are scored against the reference as check does. "
        "The review store is read, never changed.")
    p.add_argument("data", metavar="DATA", help="CSV/TSV, Parquet or XLSX file")
    add_reference_options(p)
    add_scan_options(p)
    p.add_argument("--out", metavar="FILE", required=True,
                   help="report.html (the report), cases.xlsx or cases.csv (the cases table)")
    p.add_argument("--cases", metavar="N", type=int, default=DEFAULT_CASES,
                   help=f"flagged records explained in detail in the HTML report (default {DEFAULT_CASES}; "
                   "records with a verdict are always shown, and the cases table lists every case)")
    p.add_argument("--store", metavar="PATH",
                   help="review store to read verdicts from (default: DATA.investigation.sqlite if it exists, "
                   "else the store of the same records under another name in its folder)")
    add_learn_option(p)
    add_column_options(p, "the cases table (.xlsx, .csv) shows", "the cases table (.xlsx, .csv) keeps only the "
                       "cases for which it holds")
    return {"report": run_report}


def run_report(args: argparse.Namespace) -> int:
    # Deferred: the options' import costs 1.7 s (SciPy; see investigator/cli/scan.py).
    from investigator.pipeline.options import ScanOptions

    out = Path(args.out)
    check_report_path(out)
    refuse_overwrite(args, out)
    check_reference_options(args)
    if args.cases < 0:
        raise InputError(f"--cases {args.cases}: give 0 or more (the number of cases explained in detail)")
    if args.store is not None and not Path(args.store).is_file():
        raise InputError(f"--store {args.store}: no review store there; check the path, or leave --store out "
                         "to use the one beside the data file")
    columns = column_choice(args)
    html = out.suffix.lower() in (".html", ".htm")
    if html and (args.where is not None or columns is not None):
        given = "--where" if args.where is not None else "--no-columns" if args.no_columns else "--columns"
        raise InputError(f"{given} applies to the cases table (--out cases.xlsx or cases.csv); the HTML report "
                         "shows every case")
    check_where(args)
    result = run_engine(args, ScanOptions(**scan_parameters(args)), StderrBar(), store=args.store,
                        on_load=output_checks(args.where, columns))
    write_report(result, out, cases=args.cases, store=args.store, columns=columns, where=args.where)
    flagged = int(result.flagged.sum())
    if args.where is not None:
        from investigator.report.cases import build_cases, filter_cases  # loaded by write_report already
        from investigator.report.reviews import read_review

        kept = len(filter_cases(result, build_cases(result, read_review(result, args.store)), args.where))
        echo(f"Cases table written to {out}: {kept:,} cases for which --where holds (of {flagged:,} flagged "
             "records, plus any other record with a verdict).")
        return 0
    if html:
        shown = min(flagged, args.cases)
        left = f", {flagged - shown:,} left out (--cases)" if shown < flagged else ""
        echo(f"Report written to {out}: {flagged:,} flagged records, {shown:,} in detail{left}.")
    else:
        echo(f"Cases table written to {out}: {flagged:,} flagged records, plus any other record with a verdict.")
    return 0
