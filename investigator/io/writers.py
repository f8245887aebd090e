"""What writing results needs, whatever is written: JSON text without NaN, spreadsheet-safe CSV cells, and a
usable --out path checked before any work (that it is never an input of the run, and the writing itself, are
:mod:`investigator.io.output_files`). Which result goes into which file is the output layer's
(:mod:`investigator.output.records`).

CSV cells that a spreadsheet would run as a formula (starting with = + - @, a tab or a carriage return) are
prefixed with an apostrophe (OWASP, "CSV Injection"). Numbers are written as numbers.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pandas as pd

from investigator.errors import InputError

FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
FORMATS = (".json", ".csv", ".parquet")


def neutralise(value):
    """A text cell made safe for a spreadsheet; other values unchanged."""
    if isinstance(value, str) and value.startswith(FORMULA_START):
        return "'" + value
    return value


def safe_frame(frame: pd.DataFrame) -> pd.DataFrame:
    out = frame.copy()
    for col in out.columns:
        if out[col].dtype == object or pd.api.types.is_string_dtype(out[col]):
            out[col] = out[col].map(neutralise)
    return out


def _clean(obj):
    """NaN and infinities are not JSON: they become null."""
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_clean(v) for v in obj]
    if hasattr(obj, "item"):  # numpy scalar
        return _clean(obj.item())
    return obj


def to_json_text(data: dict) -> str:
    return json.dumps(_clean(data), ensure_ascii=False, indent=1, allow_nan=False) + "\n"


def check_out_path(path: Path) -> None:
    """Refuse an unusable output path before any work is done."""
    suffix = path.suffix.lower()
    if suffix not in FORMATS:
        raise InputError(f"path={path}: unknown format '{suffix}'; use one of {', '.join(FORMATS)}",
                         parameters=("path",))
    if not path.parent.exists():
        raise InputError(f"path={path}: folder {path.parent} does not exist; create it first", parameters=("path",))
    if path.is_dir():
        raise InputError(f"path={path}: is a folder; give a file name such as result{suffix}", parameters=("path",))
