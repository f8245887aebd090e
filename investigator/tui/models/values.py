"""The records' own values for the screens: every input column as the outputs write it, its cells as text, and
its order for sorting (numbers and dates by value, text A to Z, missing cells last).

Built in the scan worker (pandas is loaded there); the screens only index arrays and format the cells they draw.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # pandas is imported in the scan worker, after the first frame
    import pandas as pd

WIDTH_SAMPLE = 500   # records whose cells decide a column's width
MAX_WIDTH = 24       # characters of a column in the Cases list at most (longer cells end with an ellipsis)


def cell_text(value) -> str:
    """One cell as the screens show it: missing as empty, whole numbers without a decimal part, dates as
    2025-03-09 (with the time where there is one), text as it is."""
    if value is None:
        return ""
    if isinstance(value, str):
        return value
    if isinstance(value, bool | np.bool_):
        return "true" if value else "false"
    if isinstance(value, np.datetime64):
        if np.isnat(value):
            return ""
        text = np.datetime_as_string(value, unit="s")
        return text[:10] if text.endswith("T00:00:00") else text.replace("T", " ")
    if isinstance(value, float | np.floating):
        if math.isnan(value):
            return ""
        if math.isfinite(value) and float(value).is_integer() and abs(value) < 1e15:
            return str(int(value))
        return f"{value:.10g}"
    if isinstance(value, int | np.integer):
        return str(value)
    if hasattr(value, "isoformat"):  # datetime, date, pandas Timestamp (NaT is not equal to itself)
        if value != value:
            return ""
        text = value.isoformat(sep=" ") if hasattr(value, "hour") else value.isoformat()
        return text[:10] if text.endswith(" 00:00:00") else text
    try:
        if value != value:  # pandas NA (its comparison is NA, whose truth raises) and NaN-likes
            return ""
    except TypeError:
        return ""
    return str(value)


@dataclass
class InputColumns:
    """Every input column of the scanned table: ``names`` as the outputs name them (``input.note`` where a
    result column has the name), ``source`` as the file names them, ``values`` the cells per name (display),
    ``typed`` the frame a WHERE condition and the sorts read (dates as dates)."""

    names: list[str]
    source: list[str]
    values: dict[str, np.ndarray]
    numeric: dict[str, bool]
    typed: pd.DataFrame
    _order: dict[str, tuple[np.ndarray, np.ndarray]] = field(default_factory=dict)
    _widths: dict[str, int] = field(default_factory=dict)

    def text(self, name: str, position: int) -> str:
        return cell_text(self.values[name][position])

    def row(self, position: int) -> list[tuple[str, str]]:
        """(name in the file, cell) of every input column of one record."""
        return [(s, self.text(n, position)) for s, n in zip(self.source, self.names, strict=True)]

    def width(self, name: str, ranking: np.ndarray) -> int:
        """The column's width in the Cases list: its name's (with the sort mark) and its cells' (a sample of the
        records along ``ranking``), between 4 and :data:`MAX_WIDTH`."""
        if name not in self._widths:
            step = max(1, len(ranking) // WIDTH_SAMPLE)
            cells = max((len(self.text(name, int(p))) for p in ranking[::step]), default=0)
            self._widths[name] = max(4, min(MAX_WIDTH, max(len(name) + 1, cells)))  # + 1: the sort mark
        return self._widths[name]

    def order(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        """(rank, known) of the column's values: ``rank`` orders the records in the column's natural direction
        (numbers and dates highest first, text A to Z), ``known`` is False where the cell is missing."""
        if name not in self._order:
            import pandas as pd  # loaded with the scan; here only to read the column's type

            s = self.typed[name]
            known = s.notna().to_numpy(dtype=bool)
            if pd.api.types.is_bool_dtype(s.dtype) or pd.api.types.is_numeric_dtype(s.dtype):
                key = -s.to_numpy(dtype=float, na_value=np.nan)
            elif pd.api.types.is_datetime64_any_dtype(s.dtype):
                stamps = s.dt.tz_convert("UTC") if getattr(s.dt, "tz", None) is not None else s
                key = -stamps.to_numpy(dtype="datetime64[ns]").astype(np.int64).astype(float)
            else:
                text = np.array([cell_text(v) for v in s.to_numpy(dtype=object)], dtype=object)
                _, key = np.unique(text, return_inverse=True)
            rank = np.zeros(len(s), dtype=np.int64)
            if known.any():
                _, rank[known] = np.unique(np.asarray(key)[known], return_inverse=True)
            self._order[name] = (rank, known)
        return self._order[name]


def input_columns(result) -> InputColumns:
    """The input columns of ``result``'s table (called in the scan worker)."""
    import pandas as pd  # deferred: the scan worker has loaded it; the app's first frame does not wait for it

    from investigator.output.columns import filter_frame, input_frame, output_names
    from investigator.output.records import date_columns

    table = result.table
    shown = input_frame(table)
    typed = filter_frame(shown, table, date_columns(result), result.options.dayfirst)
    names = output_names(table.frame.columns)
    values, numeric = {}, {}
    for name in shown.columns:
        s = shown[name]
        if pd.api.types.is_extension_array_dtype(s.dtype) and pd.api.types.is_numeric_dtype(s.dtype):
            values[name] = s.to_numpy(dtype=float, na_value=np.nan)  # Int64 with missing cells
        elif pd.api.types.is_datetime64_any_dtype(s.dtype):
            values[name] = s.to_numpy(dtype=object)
        else:
            values[name] = s.to_numpy(dtype=object) if s.dtype == object or pd.api.types.is_string_dtype(s.dtype) \
                else s.to_numpy()
        numeric[name] = bool(pd.api.types.is_numeric_dtype(s.dtype)) and not pd.api.types.is_bool_dtype(s.dtype)
    return InputColumns(list(shown.columns), [k for k in names if names[k] in shown.columns], values, numeric, typed)
