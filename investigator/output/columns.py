"""The records' own values in the outputs: the input columns after the result columns.

Every row of a CSV or Parquet result and of the cases table carries the record's input columns (all of them
by default, in file order; ``columns`` chooses some, in the order given, or none). An input column whose name
is one of the result columns of any output (:data:`RESULT_COLUMNS`, or ``score_``/``flag_``/``within_score_``
followed by a method key) is written as ``input.NAME`` (``input.rank``), so one input column has one name in
every output, whatever the options of the run, and in the workspace's filter. Values are as the file was read:
numbers written as text (``$1,234.50``) as the numbers they were read as, dates as written (a text file) or
as dates (Parquet, XLSX); from a text file or a workbook, a column of whole numbers with missing cells as
whole numbers (``17``, not ``17.0``) and a column of mixed values as text. A Parquet file's columns keep their
types.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable, Sequence

import numpy as np
import pandas as pd

from investigator.errors import InputError
from investigator.io.tables import Table
from investigator.methods import METHOD_KEYS
from investigator.prepare.calendar import parse_dates

PREFIX = "input."
# The result columns of every output (docs/output.md: CSV/Parquet, the Dask results, the cases table); an input
# column of one of these names is written with PREFIX.
RESULT_COLUMNS = frozenset({
    "row", "key", "rank", "consensus", "consensus_z", "votes", "flagged", "flag_reason", "column_hits", "imputed",
    "top_features", "cells", "stability", "out_of_spec", "verdict", "note", "priority", "review_order",
    "priority_reason", "map_x", "map_y", "kind", "pattern",
    "group", "group_size", "segment", "within_consensus", "within_flagged", "within_scored_against",
    "case", "nearest_ordinary_change", "reviewer", "verdict_at", "changed_since_verdict",
})
RESULT_PREFIXES = ("score_", "flag_", "within_score_")
ALL_METHOD_KEYS = (*METHOD_KEYS, "hotelling")
LISTED = 30  # input columns named in an error line at most
KEEP_TYPES = ("parquet", "parquet dataset")  # sources whose column types are written as they are


def is_result_name(name: str) -> bool:
    """Whether ``name`` is, or could be, a result column of some output."""
    if name in RESULT_COLUMNS:
        return True
    return any(name.startswith(p) and name[len(p):] in ALL_METHOD_KEYS for p in RESULT_PREFIXES)


def output_names(names: Iterable[str]) -> dict[str, str]:
    """Each input column's name in the outputs: its own, or ``input.NAME`` where it is a result column's name
    (prefixed again in the unlikely case that is an input column's name too)."""
    names = [str(n) for n in names]
    taken = set(names)
    out = {}
    for name in names:
        shown = name
        if is_result_name(name):
            shown = PREFIX + name
            while shown in taken:
                shown = PREFIX + shown
            taken.add(shown)
        out[name] = shown
    return out


def possible_columns(table: Table) -> list[str]:
    """Every column an output of ``table``'s scan can have: the result columns of any output (which of them a
    run writes depends on its options), then the input columns as the outputs name them."""
    results = [*sorted(RESULT_COLUMNS), *(p + k for p in RESULT_PREFIXES for k in ALL_METHOD_KEYS)]
    return [*results, *output_names(table.frame.columns).values()]


def check_where_columns(condition, table: Table) -> None:
    """A one-line error, before the scan, for a column of a WHERE ``condition`` that no output of ``table``'s
    scan can have."""
    inputs = list(output_names(table.frame.columns).values())
    shown = ", ".join(inputs[:LISTED]) + (f", ... ({len(inputs)} in all)" if len(inputs) > LISTED else "")
    condition.check(possible_columns(table), listed=f"the input columns are: {shown}; the result columns are in "
                    "docs/output.md (rank, consensus, votes, flagged, score_<method>, verdict, ...)")


def choose_columns(table: Table, columns: Sequence[str] | str | None, *, parameter: str = "columns") -> list[str]:
    """The input columns to write: all (``columns`` None), none (empty), or those named (in that order; a name
    may be given as in the file or as it is written, ``input.rank``). An unknown name is a one-line error that
    names it and lists the columns there are."""
    names = [str(c) for c in table.frame.columns]
    if columns is None:
        return names
    if isinstance(columns, str):
        columns = [c.strip() for c in columns.split(",") if c.strip()]
    shown = {v: k for k, v in output_names(names).items()}
    chosen: list[str] = []
    for given in columns:
        name = given if given in names else shown.get(given)
        if name is None:
            close = difflib.get_close_matches(given, names, n=1)
            hint = f" (did you mean '{close[0]}'?)" if close else ""
            listed = ", ".join(names[:LISTED]) + (f", ... ({len(names)} in all)" if len(names) > LISTED else "")
            raise InputError(f"{parameter}={','.join(columns)}: no column '{given}' in {table.name}{hint}; its "
                             f"columns are: {listed}", parameters=(parameter,))
        if name not in chosen:
            chosen.append(name)
    return chosen


def input_frame(table: Table, columns: Sequence[str] | str | None = None) -> pd.DataFrame:
    """The chosen input columns of ``table``, named as the outputs name them, with values ready to write."""
    chosen = choose_columns(table, columns)
    names = output_names(table.frame.columns)
    if table.source.format in KEEP_TYPES:  # the file's own column types (and one per column across partitions)
        return pd.DataFrame({names[c]: table.frame[c].reset_index(drop=True) for c in chosen},
                            index=range(table.n_rows))
    return pd.DataFrame({names[c]: written(table.frame[c]) for c in chosen}, index=range(table.n_rows))


def written(values: pd.Series) -> pd.Series:
    """One input column as the outputs write it: whole numbers as integers (also with missing cells), one type
    per column (a column of mixed values as text; dates as dates), so CSV and Parquet hold the same."""
    values = values.reset_index(drop=True)
    if pd.api.types.is_float_dtype(values.dtype):
        present = values.dropna().to_numpy(dtype=float)
        if len(present) and np.isfinite(present).all() and (present == np.round(present)).all() \
                and (np.abs(present) < 2**53).all():
            return values.astype("Int64")
        return values
    if values.dtype != object:
        return values
    kind = pd.api.types.infer_dtype(values, skipna=True)
    if kind in ("string", "empty"):
        return values
    if kind in ("datetime", "date", "datetime64"):
        try:
            return pd.to_datetime(values)
        except (ValueError, TypeError, OverflowError):  # mixed time zones or out-of-range dates: as text
            pass
    if kind == "boolean":
        return values.astype("boolean")
    if kind in ("integer", "floating", "mixed-integer-float", "decimal"):
        return written(pd.to_numeric(values, errors="coerce").astype(float))
    return values.map(lambda v: v if v is None or (isinstance(v, float) and np.isnan(v)) else str(v))


def filter_frame(frame: pd.DataFrame, table: Table, date_columns: Iterable[str], dayfirst: bool | None,
                 positions: Sequence[int] | None = None) -> pd.DataFrame:
    """``frame`` (result columns and every input column, as written; its rows the records of ``table`` at
    ``positions``, default all) with the input columns the scan found to hold dates read as dates, so a WHERE
    condition compares them as dates whatever their format."""
    names = output_names(table.frame.columns)
    out = frame.copy()
    for column in date_columns:
        name = names.get(column)
        if name is None or name not in out.columns or pd.api.types.is_datetime64_any_dtype(out[name].dtype):
            continue
        try:  # the whole column, so that day and month order is told as the scan told it
            parsed = parse_dates(table.frame[column].reset_index(drop=True), column, table.name, dayfirst)
        except InputError:  # dates in two orders: left as text
            continue
        wall = parsed.wall.to_numpy()
        out[name] = wall if positions is None else wall[np.asarray(positions, dtype=int)]
    return out
