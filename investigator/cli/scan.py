"""The ``scan`` and ``check`` commands: score every record (against itself, or against a trusted reference),
print the summary and write the result; ``scan --engine dask`` scores a Parquet dataset on a Dask cluster.
"""

from __future__ import annotations

import argparse
from collections.abc import Callable
from pathlib import Path

from investigator.cli.echo import echo
from investigator.cli.options import (
    add_column_options,
    add_output_options,
    add_reference_options,
    add_scan_options,
    check_where,
    column_choice,
    output_checks,
    refuse_overwrite,
    run_engine,
    scan_parameters,
)
from investigator.errors import InputError
from investigator.progress import StderrBar, silent


def register(sub) -> dict[str, Callable[[argparse.Namespace], int]]:
    """Add ``scan`` and ``check`` to an argparse subparsers object; return their handlers."""
    scan = sub.add_parser("scan", help="score every record and write the result",
                          description="Score every record of DATA with several methods and the per-column "
                          "rules, combine them, print a summary and optionally write the result.")
    scan.add_argument("data", metavar="DATA", help="CSV/TSV, Parquet or XLSX file, or a Parquet dataset "
                      "(a folder or a quoted glob such as 'sales/*.parquet')")
    add_scan_options(scan)
    add_output_options(scan, "DATA")
    add_column_options(scan, "a .csv or .parquet --out writes", "only the records for which it holds are written "
                       "to --out")
    large = scan.add_argument_group("past one machine (see docs/large.md)")
    large.add_argument("--engine", choices=("memory", "dask"), default="memory",
                       help="memory (default): load everything; dask: fit on a random sample, score every "
                       "partition of a Parquet dataset on a Dask cluster, write --out FOLDER")
    large.add_argument("--scheduler", metavar="ADDRESS",
                       help="with --engine dask: the scheduler of an existing cluster (e.g. tcp://host:8786); "
                       "default: start a local cluster, one worker per core")
    large.add_argument("--fit-sample", metavar="N", type=int, default=200_000,
                       help="with --engine dask: records the models are fitted on (default 200,000)")
    large.add_argument("--workers", metavar="N", type=int,
                       help="with --engine dask and no --scheduler: local worker processes (default: cores)")
    large.add_argument("--worker-memory", metavar="SIZE",
                       help="with --engine dask and no --scheduler: memory limit per local worker, e.g. 2GB "
                       "(default: an equal share of the machine's memory)")

    check = sub.add_parser("check", help="score new records against a trusted reference",
                           description="Fit the preparation and every method on the REFERENCE records "
                           "(after leaving out those the robust fit flags there: phase I) and score the "
                           "records of NEW against them. Adds Hotelling T-squared (method hotelling).")
    check.add_argument("data", metavar="NEW", help="the records to check: CSV/TSV, Parquet or XLSX")
    add_reference_options(check, required=True)
    add_scan_options(check)
    add_output_options(check, "NEW")
    add_column_options(check, "a .csv or .parquet --out writes", "only the records for which it holds are written "
                       "to --out")
    return {"scan": run_scan, "check": run_scan}


def run_scan(args: argparse.Namespace) -> int:
    # The engine is imported here, not at the top: it costs 1.9 s (scikit-learn, SciPy, pandas; measured with
    # `python -c "import investigator.pipeline.engine"` on two cores) and `investigator --help` takes 0.09 s.
    from investigator.pipeline.options import ScanOptions

    options = ScanOptions(**scan_parameters(args))
    columns = column_choice(args)
    if getattr(args, "engine", "memory") == "dask":
        if args.where is not None:
            raise InputError("--where is not available with --engine dask; filter the results folder afterwards")
        refuse_overwrite(args, args.out, folder=True)
        return _scan_on_dask(args, options, columns)
    for flag in ("scheduler", "workers", "worker_memory"):
        if getattr(args, flag, None) is not None:
            raise InputError(f"--{flag.replace('_', '-')} applies to --engine dask only; add --engine dask")
    given = "--where" if args.where is not None else "--no-columns" if args.no_columns else \
        "--columns" if args.columns is not None else None
    if given is not None and not args.out:
        raise InputError(f"{given} applies to the records written with --out; add --out FILE (.csv, .parquet)")
    if args.out:
        from investigator.io.writers import check_out_path  # pandas and pyarrow: 0.6 s, see above

        check_out_path(Path(args.out))
        if columns is not None and Path(args.out).suffix.lower() == ".json":
            flag = "--no-columns" if args.no_columns else "--columns"
            raise InputError(f"--out {args.out}: a .json result holds no input columns, so {flag} does not apply; "
                             "write .csv or .parquet, or leave it out")
        refuse_overwrite(args, args.out)  # before any work: never over the data, the reference or the store
    check_where(args)
    progress = silent if args.quiet else StderrBar()
    loaded = output_checks(args.where, columns)
    result = run_engine(args, options, progress, store=args.store, on_load=loaded)  # check: with its --reference
    if args.out:
        result.write(args.out, columns=columns, where=args.where)
    if not args.quiet:
        echo(result.summary(top=args.top))
        if args.out and args.where is not None:
            from investigator.output.records import where_positions  # loaded with the result already

            kept = len(where_positions(result, args.where))
            echo(f"Result written to {args.out}: {kept:,} of {result.n_records:,} records (those --where holds for)")
        elif args.out:
            echo(f"Result written to {args.out}")
    return 0


def _scan_on_dask(args: argparse.Namespace, options, columns=None) -> int:
    from investigator.pipeline.dask_engine import scan_dataset  # Dask's import: deferred as the engine's

    if args.store:
        raise InputError("--store is not available with --engine dask; verdicts are recorded on in-memory scans")
    result = scan_dataset(args.data, options, out=args.out, scheduler=args.scheduler, fit_sample=args.fit_sample,
                          workers=args.workers, worker_memory=args.worker_memory, top=args.top, columns=columns,
                          progress=silent if args.quiet else StderrBar())
    if not args.quiet:
        echo(result.summary())
    return 0
