"""The ``demo`` command: the built-in demo data, kept with its review store in a per-user data folder and
reused, scanned; the workspace opens at a terminal, else the summary is printed.

The folder is ``$INVESTIGATOR_DATA_DIR/demo`` when that is set (the tests set it), else the platform's data
folder: ``$XDG_DATA_HOME/investigator/demo`` or ``~/.local/share/investigator/demo`` on Linux,
``~/Library/Application Support/investigator/demo`` on macOS, ``%LOCALAPPDATA%\\investigator\\demo`` on
Windows. ``--keep FOLDER`` uses FOLDER instead. Nothing is written anywhere else: no temporary folder.
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Callable
from datetime import UTC, datetime
from pathlib import Path

from investigator.cli.echo import echo
from investigator.cli.open import open_demo
from investigator.cli.options import refuse_overwrite
from investigator.errors import InputError
from investigator.progress import StderrBar
from investigator.review.store import default_store_path

EARLIER = "earlier"  # where --fresh puts the verdicts of the demo it starts over from


def register(sub) -> dict[str, Callable[[argparse.Namespace], int]]:
    where = _shown(demo_folder()).replace("%", "%%")  # argparse formats the text with %
    demo = sub.add_parser("demo", help="scan the built-in demo data (invented expense claims)",
                          description="Scan the built-in demo data (invented expense claims of a fictional "
                          "company). The data and its review store are kept in a per-user data folder and reused, "
                          f"so verdicts are kept from one run to the next (the folder: {where}).")
    demo.add_argument("--out", metavar="FILE", help="also write the result (.json, .csv, .parquet)")
    demo.add_argument("--keep", metavar="FOLDER",
                      help="keep the demo data and its review store in FOLDER instead of the per-user data folder")
    demo.add_argument("--fresh", action="store_true",
                      help="start over: write the demo data anew and start a new review store (the earlier "
                      f"verdicts are moved to the folder's '{EARLIER}' subfolder, never deleted)")
    demo.add_argument("--seed", metavar="N", type=int, default=0,
                      help="random seed of the scan, from 0 to 4294967295 (2**32 - 1; default 0)")
    return {"demo": run_demo}


def demo_folder() -> Path:
    """Where the demo keeps its data and review store (see the module docstring)."""
    own = os.environ.get("INVESTIGATOR_DATA_DIR")
    if own:
        return Path(own) / "demo"
    if sys.platform == "win32":
        base = Path(os.environ.get("LOCALAPPDATA") or Path.home() / "AppData" / "Local")
    elif sys.platform == "darwin":
        base = Path.home() / "Library" / "Application Support"
    else:
        base = Path(os.environ.get("XDG_DATA_HOME") or Path.home() / ".local" / "share")
    return base / "investigator" / "demo"


def run_demo(args: argparse.Namespace) -> int:
    # Deferred: the demo builder needs pandas (0.6 s), the engine 1.9 s (see investigator/cli/scan.py).
    from investigator.io.demo import DEMO_FILE, DEMO_OPTIONS, is_current_demo, write_demo
    from investigator.io.writers import check_out_path
    from investigator.pipeline.engine import scan

    folder = Path(args.keep) if args.keep else demo_folder()
    path = folder / DEMO_FILE
    if args.out:  # before anything is written: a usable path, and not the demo file itself
        check_out_path(Path(args.out))
        refuse_overwrite(argparse.Namespace(data=str(path)), args.out)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"demo folder {folder}: cannot create it ({exc.strerror or type(exc).__name__}); "
                         "give another with --keep FOLDER") from None
    said = []
    if args.fresh:
        moved = _set_aside(path)
        if moved is not None:
            said.append(f"Started over: the earlier demo verdicts are kept in {moved}")
    if args.fresh or not path.exists():
        write_demo(folder)
        said.append(f"Demo data written to {path}")
    else:
        said.append(f"Demo data reused from {path}" + ("" if is_current_demo(path) else
                    " (it differs from this version's demo: edited, or written by another version; "
                    "--fresh starts over)"))
    store = default_store_path(path)
    said.append(f"Verdicts kept in {store}" if store.exists() else f"Verdicts will be kept in {store}")
    if sys.stdin.isatty() and sys.stdout.isatty() and not args.out:  # a person at a terminal: the workspace
        return open_demo(path, {**DEMO_OPTIONS, "seed": args.seed})
    for line in said:
        echo(line)
    result = scan(path, **DEMO_OPTIONS, seed=args.seed, progress=StderrBar())
    if args.out:
        result.write(args.out)
    echo(result.summary())
    if args.out:
        echo(f"Result written to {args.out}")
    return 0


def _set_aside(path: Path) -> Path | None:
    """Move the demo's review store (with its WAL files) to ``earlier/<UTC time>/``; the folder, or None when
    there was no store."""
    store = default_store_path(path)
    parts = [p for p in (store, Path(f"{store}-wal"), Path(f"{store}-shm")) if p.exists()]
    if not parts:
        return None
    stamp = datetime.now(UTC).strftime("%Y-%m-%dT%H-%M-%S.%fZ")
    target = path.parent / EARLIER / stamp
    try:
        target.mkdir(parents=True)
        for part in parts:
            os.replace(part, target / part.name)
    except OSError as exc:
        raise InputError(f"demo store {store}: cannot move it aside to {target} "
                         f"({exc.strerror or type(exc).__name__}); it is unchanged, check the folder") from None
    return target


def _shown(path: Path) -> str:
    home = str(Path.home())
    text = str(path)
    return "~" + text[len(home):] if text.startswith(home + os.sep) else text
