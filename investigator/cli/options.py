"""Option helpers shared by the commands: the parser class, the scan options every scanning command takes, the
translation of parsed arguments into the engine's parameters, and of the parameters an engine error names back into
flags. argparse is used in ``investigator.cli`` only.
"""

from __future__ import annotations

import argparse
import re
from pathlib import Path

from investigator.errors import InputError
from investigator.io.datasets import is_dataset, parquet_files
from investigator.io.output_files import check_not_input
from investigator.printable import printable
from investigator.review.store import default_store_path

METHOD_HELP = "robust_distance, local_density, isolation, neighbor_distance"


class Parser(argparse.ArgumentParser):
    """An argument parser whose usage errors are one line and exit with code 2, as every usage error."""

    def error(self, message: str) -> None:
        # The message can quote what was typed (an invalid choice): its control characters are escaped.
        self.exit(2, f"{self.prog}: error: {printable(message)} (see {self.prog} --help)\n")


def add_scan_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--id", metavar="COLUMN", help="column holding the record key (default: the data row)")
    p.add_argument("--features", metavar="A,B,C", help="use exactly these columns as features")
    p.add_argument("--exclude", metavar="X,Y", help="leave these columns out")
    p.add_argument("--methods", metavar="K1,K2", help=f"methods to run (default all: {METHOD_HELP})")
    p.add_argument("--log", metavar="auto|none|A,B", default="auto",
                   help="log-transform skewed columns: auto (default, decision reported), none, or a list")
    p.add_argument("--cutoff", metavar="Q", type=float, default=0.975,
                   help="quantile each method flags above (default 0.975; chi-square for robust_distance)")
    p.add_argument("--contamination", metavar="F", type=float,
                   help="flag this share of records instead of using the cutoffs (e.g. 0.01)")
    p.add_argument("--seed", metavar="N", type=int, default=0,
                   help="random seed, a whole number from 0 to 4294967295 (2**32 - 1; default 0)")
    add_reading_options(p)
    p.add_argument("--resamples", metavar="R", type=int, default=0,
                   help="re-run the methods on R random subsamples and report how often each flag recurs "
                   "(default 0: off; 20 is a good choice)")
    # No argparse choices: ScanOptions names the choices in a one-line error (as for --decimal).
    p.add_argument("--cells", metavar="WHICH", default="flagged",
                   help="which records get cell findings (the values that deviate from what the record's "
                   "other values predict): flagged records (default) or all")
    p.add_argument("--limits", metavar="FILE",
                   help="CSV of specification limits (column, lower, upper): out-of-spec hits per record")
    p.add_argument("--digits", metavar="COL",
                   help="digit tests on these amount columns: Benford's law (first digit, first two digits) and "
                   "Nigrini's last-two-digits test; the round-amount screen runs on them too")
    p.add_argument("--threshold", metavar="COL=VALUE[:WIDTH]", action="append",
                   help="approval threshold: records in the band just below VALUE against the band above "
                   "(width WIDTH, default 5%% of VALUE), binomial test; repeat it or separate by commas; the "
                   "round-amount screen runs on the column too")
    p.add_argument("--round", metavar="COL", help="round-amount screen (amounts ending in 00 or 000 against "
                   "what the column's distribution implies) on these columns, besides those of --digits and "
                   "--threshold")
    p.add_argument("--duplicates", metavar="A,B",
                   help="report groups of records with the same values on these columns")
    p.add_argument("--dates", metavar="A,B|none",
                   help="date columns to use through their calendar parts (weekday, period end, hour, holiday); "
                   "default: the columns found to hold dates; none: leave dates out")
    p.add_argument("--hours", metavar="H1-H2",
                   help="working hours for the outside-hours rule: from H1:00 up to H2:00 (default 8-18)")
    p.add_argument("--holidays", metavar="CC[-SUB]",
                   help="public holidays of this country (US, DE-BY, ...) as a calendar part and rule")
    p.add_argument("--durations", metavar="START:END",
                   help="days from START to END (two date columns; several separated by commas) as features")
    p.add_argument("--dayfirst", action="store_const", const=True, default=None,
                   help="read dates such as 03/04/2025 as day/month (default: told from the values, else "
                   "month/day)")
    p.add_argument("--within", metavar="COLUMN[,COLUMN]",
                   help="peer groups: also score each record against the records of its own segment (the records "
                   "sharing these columns' values: a vendor, a product line), every method fitted per segment")
    p.add_argument("--map", metavar="auto|umap|pca|none", default=None,
                   help="add 2-D map coordinates (auto: UMAP, or PCA for tiny data); the map command defaults "
                   "to auto, every other command to none (give it to report to include the map)")
    p.add_argument("--fresh", action="store_true",
                   help="scan again even when the same scan of the same file is kept (in DATA.investigation-cache, "
                   "beside the review store; INVESTIGATOR_SCAN_CACHE=off turns keeping scans off)")
    p.add_argument("--exact", action="store_true",
                   help="no sampling on large data: exact neighbour search (sampled by default above 20,000 "
                   "records), MCD searched on all records (above 100,000) and peers among all ordinary "
                   "records (above 100,000); slower, see run.approximations")


def add_reading_options(p: argparse.ArgumentParser) -> None:
    """How the data file is read: its sheet, decimal mark and header row (also for the review commands, whose
    records must be keyed as the scan keyed them)."""
    p.add_argument("--sheet", metavar="NAME", help="worksheet of an .xlsx file (default: the first)")
    p.add_argument("--decimal", metavar="MARK",
                   help="decimal mark of numbers written as text: . or , (default: told from each column; "
                   "'1.234,56' is read with a comma)")
    p.add_argument("--header-row", metavar="N", type=int,
                   help="row of the file holding the column names, from 1 (default: found; title and blank "
                   "rows above it are skipped, with a notice)")


def add_reference_options(p: argparse.ArgumentParser, *, required: bool = False) -> None:
    """A trusted reference to score the records against (``check``; optional in ``explain``, ``open`` and
    ``report``): the same fit, by :func:`run_engine`."""
    what = "the trusted reference records" if required else \
        "score the records against these trusted reference records, as check does (default: scan DATA alone)"
    p.add_argument("--reference", metavar="REF", required=required, help=what)
    p.add_argument("--reference-sheet", metavar="NAME", help="worksheet of an .xlsx reference")
    p.add_argument("--keep-reference-outliers", action="store_true",
                   help="keep the reference records the robust fit flags (default: leave them out)")


def check_reference_options(args: argparse.Namespace) -> None:
    """--reference-sheet and --keep-reference-outliers mean something with --reference only."""
    if getattr(args, "reference", None) is None:
        for flag_name, given in (("--reference-sheet", getattr(args, "reference_sheet", None) is not None),
                                 ("--keep-reference-outliers", getattr(args, "keep_reference_outliers", False))):
            if given:
                raise InputError(f"{flag_name} applies with --reference only; add --reference REF or leave it out")


def run_engine(args: argparse.Namespace, options, progress, store=None, on_load=None):
    """Scan DATA, or with --reference score it against the reference as ``check`` does (one fit for every
    command). ``options``: the ScanOptions; ``on_load``: the engine's hook on the loaded table
    (:func:`output_checks`)."""
    # Deferred: the engine's import costs 1.9 s (see investigator/cli/scan.py), and --help must stay fast.
    from investigator.pipeline.engine import check, scan

    check_reference_options(args)
    learn = getattr(args, "learn", True)
    if getattr(args, "reference", None) is not None:
        return check(args.data, reference=args.reference, reference_sheet=args.reference_sheet, options=options,
                     progress=progress, store=store, on_load=on_load, learn=learn)
    return scan(args.data, options=options, progress=progress, store=store, on_load=on_load, learn=learn,
                cache=cache_choice(args))


def cache_choice(args: argparse.Namespace) -> bool | str:
    """The engine's ``cache``: with --fresh, scan again and keep the new result (pipeline/scan_cache.py)."""
    return "refresh" if getattr(args, "fresh", False) else True


def add_output_options(p: argparse.ArgumentParser, data: str) -> None:
    p.add_argument("--out", metavar="FILE", help="write the result: .json, .csv or .parquet")
    p.add_argument("--store", metavar="PATH", help="review store to read verdicts from "
                   f"(default: {data}.investigation.sqlite when it exists, else the store of the same records "
                   "under another name in its folder)")
    add_learn_option(p)
    p.add_argument("--top", metavar="N", type=int, default=10, help="flagged records in the summary")
    p.add_argument("--quiet", action="store_true", help="no summary and no progress bar")


def add_learn_option(p: argparse.ArgumentParser) -> None:
    p.add_argument("--no-learn", dest="learn", action="store_false",
                   help="leave out the priority learned from the verdicts in the review store (priority, review_order, "
                   "priority_reason; docs/learning.md): the consensus order only")


WHERE_EXAMPLE = "\"amount > 5000 AND vendor = 'Q17'\""


def add_column_options(p: argparse.ArgumentParser, what: str, where: str | None) -> None:
    """``--columns`` / ``--no-columns``: the input columns ``what`` shows after the result columns; ``--where``
    (unless ``where`` is None): an SQL WHERE condition on them, ``where`` saying what it filters."""
    group = p.add_mutually_exclusive_group()
    group.add_argument("--columns", metavar="A,B",
                       help=f"the input columns {what} after the result columns, in this order (default: every "
                       "input column, in file order; a column named like a result column is input.NAME)")
    group.add_argument("--no-columns", action="store_true", help=f"leave the input columns out of {what}")
    if where is not None:
        p.add_argument("--where", metavar="CONDITION",
                       help=f"{where}: an SQL WHERE condition on the result and input columns, e.g. {WHERE_EXAMPLE} "
                       "(=, <>, <, >, AND, OR, NOT, IN, BETWEEN, LIKE, IS NULL; see docs/output.md)")


def column_choice(args: argparse.Namespace) -> tuple[str, ...] | None:
    """The input columns chosen with ``--columns`` (a tuple), none with ``--no-columns`` (empty), or None: all."""
    if getattr(args, "no_columns", False):
        return ()
    given = getattr(args, "columns", None)
    if given is None:
        return None
    names = tuple(c.strip() for c in given.split(",") if c.strip())
    if not names:
        raise InputError(f"--columns '{given}': give column names separated by commas, or --no-columns for none")
    return names


def check_where(args: argparse.Namespace) -> None:
    """A bad ``--where`` condition is reported before any work (its columns are checked once the data is read)."""
    if getattr(args, "where", None) is not None:
        from investigator.output.where import parse_where  # pandas: 0.6 s, kept off `--help`

        parse_where(args.where)


def output_checks(where: str | None, columns: tuple[str, ...] | None):
    """What to check once the data is read, before the scan: the ``--columns`` named and the columns of
    ``--where`` are in the file (a result column of the WHERE condition is checked after the scan)."""
    def loaded(table) -> None:
        from investigator.output.columns import check_where_columns, choose_columns  # pandas, loaded by now
        from investigator.output.where import parse_where

        choose_columns(table, columns)
        if where is not None:
            check_where_columns(parse_where(where), table)

    return loaded


def scan_parameters(args: argparse.Namespace) -> dict:
    """The engine parameters (``ScanOptions`` fields) given on the command line; unset ones left out."""
    given = {
        "id": args.id, "features": args.features, "exclude": args.exclude,
        "methods": args.methods or None, "log": args.log, "cutoff": args.cutoff,
        "contamination": args.contamination, "seed": args.seed, "sheet": args.sheet, "exact": args.exact,
        "decimal": getattr(args, "decimal", None), "header_row": getattr(args, "header_row", None),
        "resamples": args.resamples, "limits": args.limits, "digits": args.digits, "map": args.map,
        "duplicates": args.duplicates, "cells": getattr(args, "cells", None),
        "dates": getattr(args, "dates", None), "hours": getattr(args, "hours", None),
        "holidays": getattr(args, "holidays", None), "durations": getattr(args, "durations", None),
        "dayfirst": getattr(args, "dayfirst", None),
        "round": getattr(args, "round", None), "threshold": getattr(args, "threshold", None),
        "within": getattr(args, "within", None),
        "keep_reference_outliers": getattr(args, "keep_reference_outliers", False),
    }
    return {k: v for k, v in given.items() if v is not None}


def command_inputs(args: argparse.Namespace) -> list[tuple[str, str | Path | None]]:
    """What a command reads and must never write over: the data (each file of a Parquet dataset), the
    reference, the limits file and the review store (given, or the default one beside the data)."""
    data = getattr(args, "data", None)
    inputs: list[tuple[str, str | Path | None]] = []
    store = getattr(args, "store", None)
    if data is not None and is_dataset(data):
        try:
            files = parquet_files(data)
        except InputError:  # no Parquet files there: reported by the scan itself, nothing to overwrite
            files = []
        folder = [("data folder", data)] if Path(data).is_dir() else []  # a glob: its files are the inputs
        inputs += [*folder, *(("data file", f) for f in files)]
    elif data is not None:
        inputs += [("data file", data), ("review store", store or default_store_path(data))]
    return [*inputs, ("reference file", getattr(args, "reference", None)),
            ("limits file", getattr(args, "limits", None)), ("review store", store)]


def refuse_overwrite(args: argparse.Namespace, out: str | Path | None, *, parameter: str = "out",
                     folder: bool = False) -> None:
    """Refuse, before any work, an output path (``--out``, ``--export``) that is one of the command's inputs.
    Every command that writes a file calls this first; the writers check again before writing."""
    if out is not None:
        check_not_input(out, command_inputs(args), parameter=parameter, folder=folder)


# Flags spelled otherwise than `--` + the API parameter with dashes for underscores. `scan_dataset` is how the
# API names the Dask path (a function of its own), and `path` is ScanResult.write's output file.
FLAGS = {"state": "--set", "path": "--out", "scan_dataset": "--engine dask"}


def flag(parameter: str) -> str:
    """The command-line spelling of an API parameter: ``worker_memory`` is ``--worker-memory``."""
    return FLAGS.get(parameter, "--" + parameter.replace("_", "-"))


def flag_message(error: InputError) -> str:
    """The message of ``error`` in the command line's words: each parameter it lists, spelled ``name=value``
    or ```name``` by the engine, becomes ``--name value`` or ``--name``; the rest of the text is kept as it is."""
    text = str(error)
    for name in error.parameters:
        text = text.replace(f"`{name}`", flag(name))
        # `name=` only where a word starts: a value such as a path or a column list is never rewritten.
        text = re.sub(rf"(?<![^\s(]){re.escape(name)}=", lambda _, name=name: flag(name) + " ", text)
    return text
