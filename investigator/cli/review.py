"""The ``verdict`` and ``verdicts`` commands: record a verdict from a script, list and export them.

Neither runs a scan: the table is loaded and the record fingerprinted, nothing is scored. Bad input raises
an InputError before the store is opened, so a rejected command leaves the store as it was.
"""

from __future__ import annotations

import argparse
from collections.abc import Callable
from pathlib import Path

from investigator.cli.echo import echo
from investigator.cli.options import add_reading_options, refuse_overwrite
from investigator.errors import InputError
from investigator.io.output_files import same_file
from investigator.review.store import (
    VERDICT_MEANING,
    VERDICTS,
    Entry,
    ReviewStore,
    check_reviewer,
    check_verdict,
)
from investigator.review.verdicts import (
    case_rows,
    check_export,
    identical_rows,
    listing,
    locate,
    record_verdict,
    row_list,
    shown,
    where,
    write_export,
)


def register(subparsers) -> dict[str, Callable[[argparse.Namespace], int]]:
    """Add ``verdict`` and ``verdicts`` to an argparse subparsers object; return their handlers."""
    states = ", ".join(f"{s} ({VERDICT_MEANING[s]})" for s in VERDICTS)
    v = subparsers.add_parser(
        "verdict", help="record a verdict and a note on one record",
        description="Record a verdict on one record of DATA in the review store (no scan is run). "
        f"States: {states}.")
    v.add_argument("data", metavar="DATA", help="CSV/TSV, Parquet or XLSX file")
    which = v.add_mutually_exclusive_group(required=True)
    which.add_argument("--row", metavar="N", type=int, help="the record's 1-based data row")
    which.add_argument("--key", metavar="K", help="the record's key (the --id column's value)")
    v.add_argument("--set", dest="state", metavar="STATE", required=True,
                   help=f"one of {', '.join(VERDICTS)}")
    v.add_argument("--note", metavar="TEXT",
                   help="the note (default: keep the case's current note; --note '' clears it)")
    v.add_argument("--reviewer", metavar="NAME", help="who decided (default: the OS user)")
    _add_common(v)

    ls = subparsers.add_parser(
        "verdicts", help="list the verdicts and their history",
        description="List the current verdicts on the records of DATA (changed records with both versions, "
        "verdicts whose record is gone) and every change in the history.")
    ls.add_argument("data", metavar="DATA", help="CSV/TSV, Parquet or XLSX file")
    ls.add_argument("--export", metavar="FILE", help="also write them: .csv (one row per change) or .json")
    _add_common(ls)
    return {"verdict": run_verdict, "verdicts": run_verdicts}


def _add_common(p: argparse.ArgumentParser) -> None:
    p.add_argument("--store", metavar="PATH", help="the review store (default: DATA.investigation.sqlite, or the "
                   "store of the same records under another name in its folder; see docs/review.md)")
    p.add_argument("--id", metavar="COLUMN", help="column holding the record key (default: the data row)")
    add_reading_options(p)


def store_path(args: argparse.Namespace, table):
    """The review store of DATA's ``table`` (review/stores.py: given, by name, else by content), a StoreChoice."""
    from investigator.review.stores import find_store  # pandas: 0.6 s, deferred as load_table

    found = find_store(table, args.data, args.store)
    data = Path(args.data)
    if data.exists() and found.path.exists() and same_file(found.path, data):  # also through a symbolic or hard link
        raise InputError(f"--store {found.path}: is the data file itself; give another path for the store")
    return found


def run_verdict(args: argparse.Namespace) -> int:
    from investigator.io.tables import load_table  # pandas: 0.6 s to import, deferred past --help

    state = check_verdict(args.state)  # every check before the store is opened
    if args.reviewer is not None:
        check_reviewer(args.reviewer)
    table = load_table(args.data, sheet=args.sheet, id_column=args.id, decimal=args.decimal,
                       header_row=args.header_row)
    position = locate(table, args.row, args.key)
    found = store_path(args, table)
    path = found.path
    entry, before = record_verdict(table, position, state, args.note, path, reviewer=args.reviewer,
                                   content=found.content)
    said = f", note '{shown(entry.note)}'" if entry.note else ""
    was = f"; was {before.verdict}" if before else ""
    how = " (the store of the same records under another file name: matched by content)" if found.by_content else ""
    echo(f"{where(position + 1, table)}: {entry.verdict}{said} (by {shown(entry.reviewer)}{was}). "
          f"Saved in {path}{how}")
    copies = identical_rows(table, position, entry.fingerprint) if table.key_column is None else []
    if len(copies) > 1:
        echo(f"It applies to all {len(copies)} identical records (rows {row_list(copies)}); give --id COLUMN "
              "to tell them apart.")
    return 0


def run_verdicts(args: argparse.Namespace) -> int:
    from investigator.io.tables import load_table  # pandas, both: deferred as in run_verdict
    from investigator.review.matching import match_entries

    out = Path(args.export) if args.export else None
    if out is not None:
        check_export(out)
        refuse_overwrite(args, out, parameter="export")
    table = load_table(args.data, sheet=args.sheet, id_column=args.id, decimal=args.decimal,
                       header_row=args.header_row)
    found = store_path(args, table)
    path = found.path
    current: list[Entry] = []
    history: list[Entry] = []
    if path.exists():  # listing never creates a store
        with ReviewStore(path, create=False) as store:
            current, history = store.current(), store.history()
    matching = match_entries(table, current)
    cases = case_rows(matching, current)
    if out is not None:
        write_export(out, path, table, cases, history)
    if found.by_content:
        echo(f"{shown(table.name)} has no review store of its own name; {found.describe(table.name)}.")
    echo(listing(path, table, matching, history, exists=path.exists()))
    if out is not None:
        echo(f"Verdicts written to {out}")
    return 0


