"""Command line: argument parsing and exit codes only; the work is done by the engine.

Exit codes: 0 done, 2 bad input or usage (one line naming the file/column and the fix), 1 internal error.
"""

from __future__ import annotations

import argparse
import os
import sys

DESCRIPTION = (
    "Find the records in a table that do not fit with the rest, and say why. "
    "Flags are leads for a person to review, not proof of error or fraud."
)
METHOD_HELP = "robust_distance, local_density, isolation, neighbor_distance"


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # one line, exit 2, as for every usage error
        self.exit(2, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def _add_scan_options(p: argparse.ArgumentParser) -> None:
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
    p.add_argument("--seed", metavar="N", type=int, default=0, help="random seed (default 0)")
    p.add_argument("--sheet", metavar="NAME", help="worksheet of an .xlsx file (default: the first)")
    p.add_argument("--resamples", metavar="R", type=int, default=0,
                   help="re-run the methods on R random subsamples and report how often each flag recurs "
                   "(default 0: off; 20 is a good choice)")
    p.add_argument("--limits", metavar="FILE",
                   help="CSV of specification limits (column, lower, upper): out-of-spec hits per record")
    p.add_argument("--digits", metavar="COL", help="Benford's law first-digit tests on these amount columns")
    p.add_argument("--duplicates", metavar="A,B",
                   help="report groups of records with the same values on these columns")
    p.add_argument("--map", metavar="auto|umap|pca|none", default=None,
                   help="add 2-D map coordinates (auto: UMAP, or PCA for tiny data); the map command defaults "
                   "to auto, every other command to none (give it to report to include the map)")
    p.add_argument("--exact", action="store_true",
                   help="no sampling on large data: exact neighbour search (sampled by default above 20,000 "
                   "records), MCD searched on all records (above 100,000) and peers among all ordinary "
                   "records (above 100,000); slower, see run.approximations")


def _add_output_options(p: argparse.ArgumentParser, data: str) -> None:
    p.add_argument("--out", metavar="FILE", help="write the result: .json, .csv or .parquet")
    p.add_argument("--store", metavar="PATH", help="review store to read verdicts from "
                   f"(default: {data}.investigation.sqlite, when it exists)")
    p.add_argument("--top", metavar="N", type=int, default=10, help="flagged records in the summary")
    p.add_argument("--quiet", action="store_true", help="no summary and no progress bar")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="investigator", description=DESCRIPTION)
    from . import __version__

    parser.add_argument("--version", action="version", version=f"investigator {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    scan = sub.add_parser("scan", help="score every record and write the result",
                          description="Score every record of DATA with several methods and the per-column "
                          "rules, combine them, print a summary and optionally write the result.")
    scan.add_argument("data", metavar="DATA", help="CSV/TSV, Parquet or XLSX file, or a Parquet dataset "
                      "(a folder or a quoted glob such as 'sales/*.parquet')")
    _add_scan_options(scan)
    _add_output_options(scan, "DATA")
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
    check.add_argument("--reference", metavar="REF", required=True, help="the trusted reference records")
    check.add_argument("--reference-sheet", metavar="NAME", help="worksheet of an .xlsx reference")
    check.add_argument("--keep-reference-outliers", action="store_true",
                       help="keep the reference records the robust fit flags (default: leave them out)")
    _add_scan_options(check)
    _add_output_options(check, "NEW")

    mapping = sub.add_parser("map", help="draw the 2-D map of the records as a PNG",
                             description="Scan DATA and draw its 2-D map: ordinary records faint, flagged "
                             "records by consensus, small groups outlined and labelled.")
    mapping.add_argument("data", metavar="DATA", help="CSV/TSV, Parquet or XLSX file")
    _add_scan_options(mapping)
    mapping.add_argument("--out", metavar="FILE.png", required=True, help="the PNG to write")

    explain = sub.add_parser("explain", help="explain why one record stands out",
                             description="Scan DATA and explain one record: which features made it stand "
                             "out and in which direction, its peers, what would make it ordinary.")
    explain.add_argument("data", metavar="DATA", help="CSV/TSV, Parquet or XLSX file")
    which = explain.add_mutually_exclusive_group(required=True)
    which.add_argument("--row", metavar="N", type=int, help="the record's 1-based data row")
    which.add_argument("--key", metavar="K", help="the record's key (the --id column's value)")
    _add_scan_options(explain)
    explain.add_argument("--peers", metavar="K", type=int, default=5, help="peers to show (default 5)")

    demo = sub.add_parser("demo", help="scan the built-in demo data (invented expense claims)",
                          description="Write the built-in demo data (invented expense claims of a "
                          "fictional company) to a temporary folder, scan it and print the summary.")
    demo.add_argument("--out", metavar="FILE", help="also write the result (.json, .csv, .parquet)")
    demo.add_argument("--keep", metavar="FOLDER", help="write the demo CSV here instead of a temp folder")
    demo.add_argument("--seed", metavar="N", type=int, default=0, help="random seed of the scan")

    from .review.commands import add_review_commands  # verdict, verdicts: the review store

    COMMANDS.update(add_review_commands(sub))
    from .tui.commands import add_tui_commands  # open: the investigation workspace (terminal UI)

    COMMANDS.update(add_tui_commands(sub))
    from .report.commands import add_report_commands  # report: HTML report, cases table

    COMMANDS.update(add_report_commands(sub))
    return parser


def _options(args) -> dict:
    return {
        "id": args.id, "features": args.features, "exclude": args.exclude,
        "methods": args.methods or None, "log": args.log, "cutoff": args.cutoff,
        "contamination": args.contamination, "seed": args.seed, "sheet": args.sheet, "exact": args.exact,
        "resamples": args.resamples, "limits": args.limits, "digits": args.digits, "map": args.map,
        "duplicates": args.duplicates,
        "keep_reference_outliers": getattr(args, "keep_reference_outliers", False),
    }


def _cmd_scan(args) -> int:
    from .engine import check, scan
    from .options import ScanOptions
    from .progress import StderrBar, silent

    opts = {k: v for k, v in _options(args).items() if v is not None}
    options = ScanOptions(**opts)
    if getattr(args, "engine", "memory") == "dask":
        return _scan_on_dask(args, options)
    from .errors import InputError

    for flag in ("scheduler", "workers", "worker_memory"):
        if getattr(args, flag, None) is not None:
            raise InputError(f"--{flag.replace('_', '-')} applies to --engine dask only; add --engine dask")
    if args.out:
        from pathlib import Path

        from .export import check_out_path

        check_out_path(Path(args.out))
    progress = silent if args.quiet else StderrBar()
    if args.command == "check":
        result = check(args.data, reference=args.reference, reference_sheet=args.reference_sheet,
                       options=options, progress=progress, store=args.store)
    else:
        result = scan(args.data, options=options, progress=progress, store=args.store)
    if args.out:
        result.write(args.out)
    if not args.quiet:
        print(result.summary(top=args.top))
        if args.out:
            print(f"Result written to {args.out}")
    return 0


def _scan_on_dask(args, options) -> int:
    from .dask_scan import scan_dataset
    from .progress import StderrBar, silent

    if args.store:
        from .errors import InputError

        raise InputError("--store is not available with --engine dask; verdicts are recorded on in-memory scans")
    result = scan_dataset(args.data, options, out=args.out, scheduler=args.scheduler, fit_sample=args.fit_sample,
                          workers=args.workers, worker_memory=args.worker_memory, top=args.top,
                          progress=silent if args.quiet else StderrBar())
    if not args.quiet:
        print(result.summary())
    return 0


def _cmd_explain(args) -> int:
    from .engine import scan
    from .explain.text import explanation_text
    from .options import ScanOptions
    from .progress import StderrBar

    opts = {k: v for k, v in _options(args).items() if v is not None}
    result = scan(args.data, options=ScanOptions(**opts), progress=StderrBar())
    print(explanation_text(result.explain(row=args.row, key=args.key, peers=args.peers)))
    return 0


def _cmd_map(args) -> int:
    from pathlib import Path

    from .engine import scan
    from .errors import InputError
    from .options import ScanOptions
    from .progress import StderrBar
    from .structure.plot import draw_map

    out = Path(args.out)
    if out.suffix.lower() != ".png" or not out.parent.exists():
        raise InputError(f"--out {out}: give a .png file in an existing folder")
    opts = {k: v for k, v in _options(args).items() if v is not None}
    opts.setdefault("map", "auto")
    if opts["map"] == "none":
        raise InputError("--map none: the map command needs a map; use auto, umap or pca")
    result = scan(args.data, options=ScanOptions(**opts), progress=StderrBar())
    draw_map(result.map, result.flagged, result.consensus, result.groups, out,
             subtitle=f"{result.table.name}: {result.n_records:,} records, {int(result.flagged.sum()):,} flagged")
    print(f"Map written to {out} ({result.run['map']['method']})")
    return 0


def _cmd_demo(args) -> int:
    import tempfile
    from pathlib import Path

    from .demo import DEMO_ID, write_demo
    from .engine import scan
    from .progress import StderrBar

    folder = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="investigator-demo-"))
    folder.mkdir(parents=True, exist_ok=True)
    path = write_demo(folder)
    if sys.stdin.isatty() and sys.stdout.isatty() and not args.out:  # a person at a terminal: the workspace
        from .tui.commands import open_demo

        return open_demo(path, args)
    print(f"Demo data written to {path}")
    result = scan(path, id=DEMO_ID, seed=args.seed, progress=StderrBar())
    if args.out:
        result.write(args.out)
    print(result.summary())
    if args.out:
        print(f"Result written to {args.out}")
    return 0


COMMANDS = {"scan": _cmd_scan, "check": _cmd_scan, "map": _cmd_map, "explain": _cmd_explain, "demo": _cmd_demo}


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    from .errors import InputError

    try:
        return COMMANDS[args.command](args)
    except InputError as exc:
        message = str(exc).replace("\r", "\\r").replace("\n", "\\n")  # always one line
        print(f"investigator {args.command}: error: {message}", file=sys.stderr)
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
        print(
            f"investigator {args.command}: internal error: {type(exc).__name__}: {exc} "
            "(set INVESTIGATOR_DEBUG=1 to see the traceback, and please report it)",
            file=sys.stderr,
        )
        return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
