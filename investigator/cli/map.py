"""The ``map`` command: scan DATA and draw its 2-D map as a PNG."""

from __future__ import annotations

import argparse
from collections.abc import Callable
from pathlib import Path

from investigator.cli.echo import echo
from investigator.cli.options import add_scan_options, cache_choice, refuse_overwrite, scan_parameters
from investigator.errors import InputError
from investigator.progress import StderrBar


def register(sub) -> dict[str, Callable[[argparse.Namespace], int]]:
    mapping = sub.add_parser("map", help="draw the 2-D map of the records as a PNG",
                             description="Scan DATA and draw its 2-D map: ordinary records faint, flagged "
                             "records by consensus, small groups outlined and labelled.")
    mapping.add_argument("data", metavar="DATA", help="CSV/TSV, Parquet or XLSX file")
    add_scan_options(mapping)
    mapping.add_argument("--out", metavar="FILE.png", required=True, help="the PNG to write")
    return {"map": run_map}


def run_map(args: argparse.Namespace) -> int:
    out = Path(args.out)
    if out.suffix.lower() != ".png" or not out.parent.exists():
        raise InputError(f"--out {out}: give a .png file in an existing folder")
    refuse_overwrite(args, out)
    opts = scan_parameters(args)
    opts.setdefault("map", "auto")
    if opts["map"] == "none":
        raise InputError("--map none: the map command needs a map; use auto, umap or pca")
    # Deferred: the engine costs 1.9 s and matplotlib 1.8 s to import (see investigator/cli/scan.py).
    from investigator.output.map_plot import draw_map
    from investigator.pipeline.engine import scan
    from investigator.pipeline.options import ScanOptions

    result = scan(args.data, options=ScanOptions(**opts), progress=StderrBar(), cache=cache_choice(args))
    draw_map(result.map, result.flagged, result.consensus, result.groups, out, rank=result.rank,
             subtitle=f"{result.table.name}: {result.n_records:,} records, {int(result.flagged.sum()):,} flagged")
    echo(f"Map written to {out} ({result.run.map.method})")
    return 0
