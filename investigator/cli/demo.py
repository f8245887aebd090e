"""The ``demo`` command: write the built-in demo data, scan it, open the workspace (at a terminal) or print
the summary."""

from __future__ import annotations

import argparse
import sys
import tempfile
from collections.abc import Callable
from pathlib import Path

from investigator.cli.echo import echo
from investigator.cli.open import open_demo
from investigator.cli.options import refuse_overwrite
from investigator.progress import StderrBar


def register(sub) -> dict[str, Callable[[argparse.Namespace], int]]:
    demo = sub.add_parser("demo", help="scan the built-in demo data (invented expense claims)",
                          description="Write the built-in demo data (invented expense claims of a "
                          "fictional company) to a temporary folder, scan it and print the summary.")
    demo.add_argument("--out", metavar="FILE", help="also write the result (.json, .csv, .parquet)")
    demo.add_argument("--keep", metavar="FOLDER", help="write the demo CSV here instead of a temp folder")
    demo.add_argument("--seed", metavar="N", type=int, default=0,
                      help="random seed of the scan, from 0 to 4294967295 (2**32 - 1; default 0)")
    return {"demo": run_demo}


def run_demo(args: argparse.Namespace) -> int:
    # Deferred: the demo builder needs pandas (0.6 s), the engine 1.9 s (see investigator/cli/scan.py).
    from investigator.io.demo import DEMO_FILE, DEMO_OPTIONS, write_demo
    from investigator.io.writers import check_out_path
    from investigator.pipeline.engine import scan

    folder = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="investigator-demo-"))
    if args.out:  # before anything is written: a usable path, and not the demo file itself
        check_out_path(Path(args.out))
        refuse_overwrite(argparse.Namespace(data=str(folder / DEMO_FILE)), args.out)
    folder.mkdir(parents=True, exist_ok=True)
    path = write_demo(folder)
    if sys.stdin.isatty() and sys.stdout.isatty() and not args.out:  # a person at a terminal: the workspace
        return open_demo(path, {**DEMO_OPTIONS, "seed": args.seed})
    echo(f"Demo data written to {path}")
    result = scan(path, **DEMO_OPTIONS, seed=args.seed, progress=StderrBar())
    if args.out:
        result.write(args.out)
    echo(result.summary())
    if args.out:
        echo(f"Result written to {args.out}")
    return 0
