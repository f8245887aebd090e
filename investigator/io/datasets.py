"""Parquet datasets: a folder of Parquet files or a glob pattern, read as one table in a fixed order.

The order is the files' names in natural order (``part.2`` before ``part.10``), then the rows within each
file; a record's row is its 1-based position in that order, in memory and on Dask alike.
"""

from __future__ import annotations

import glob
import re
from pathlib import Path

from investigator.errors import InputError

PARQUET_SUFFIXES = {".parquet", ".pq"}


def is_dataset(data) -> bool:
    """True when ``data`` names a folder or holds a glob pattern rather than one file."""
    if not isinstance(data, str | Path):
        return False
    text = str(data)
    return Path(text).is_dir() or any(ch in text for ch in "*?[")


def _natural(path: Path) -> list:
    return [int(part) if part.isdigit() else part for part in re.split(r"(\d+)", str(path))]


def parquet_files(data) -> list[Path]:
    """The Parquet files of a dataset (folder or glob), in natural order; a clear error when there are none.
    Files whose names start with '.' or '_' (markers and metadata) are not data."""
    text = str(data)
    if Path(text).is_dir():
        found = [p for p in Path(text).rglob("*") if p.is_file()]
        where = f"{text}: the folder"
    elif any(ch in text for ch in "*?["):
        found = [Path(p) for p in glob.glob(text, recursive=True) if Path(p).is_file()]
        where = f"{text}: the pattern"
    else:
        path = Path(text)
        if not path.exists():
            raise InputError(f"{path}: no such file or folder; check the path")
        found, where = [path], str(path)
    files = sorted((p for p in found if p.suffix.lower() in PARQUET_SUFFIXES
                    and not any(part.startswith((".", "_")) for part in p.parts[-1:])), key=_natural)
    if not files:
        others = sorted({p.suffix or p.name for p in found})[:5]
        seen = f" (it holds {', '.join(others)})" if others else ""
        raise InputError(f"{where} matches no Parquet files (.parquet, .pq){seen}; point it at a Parquet "
                         "dataset, or give one CSV/Parquet/XLSX file")
    return files
