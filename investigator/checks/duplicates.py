"""Duplicate records: exact copies, and records that share the values of chosen columns.

Two screens, reported the same way, as groups of records:

* :func:`exact_duplicates`: records equal on every column (or on every column of a given list, e.g. the
  feature columns; a key column that is unique per record must be left out, or nothing can match);
* :func:`duplicates_on`: records equal on the chosen columns only, e.g. vendor + amount + date, the usual
  screen for a claim or invoice paid twice.

Values are compared as loaded: exactly, without trimming, case folding or rounding (normalise the columns
first if "NORTH QUAY " and "North Quay" should match). Missing values: by default a missing value equals a missing value
(``missing="equal"``), so two records that are copies of each other, blanks included, form a group;
``missing="skip"`` leaves out every record with a missing value in a compared column, for screens where a
blank vendor or date should not count as a match. NaN, None, NaT and pandas' NA are all "missing".

A group is a lead: a repeated amount to the same vendor on the same day can be two genuine purchases.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from investigator.errors import InputError

MISSING_RULES = ("equal", "skip")


@dataclass
class DuplicateGroup:
    """Records that share ``values``: their 1-based data rows (and keys, when given)."""

    rows: list[int]
    values: dict[str, Any]
    keys: list | None = None

    @property
    def size(self) -> int:
        return len(self.rows)

    def as_dict(self) -> dict:
        out: dict[str, Any] = {"rows": list(self.rows), "size": self.size, "values": dict(self.values)}
        if self.keys is not None:
            out["keys"] = list(self.keys)
        return out


@dataclass
class DuplicateReport:
    """All duplicate groups of one screen, ordered by their first row.

    ``kind`` is ``"exact"`` or ``"columns"``; ``columns`` the columns compared; ``n_records`` the records
    screened.
    """

    kind: str
    columns: list[str]
    missing: str
    n_records: int
    groups: list[DuplicateGroup] = field(default_factory=list)

    @property
    def n_groups(self) -> int:
        return len(self.groups)

    @property
    def n_in_groups(self) -> int:
        """Records that belong to some group."""
        return sum(g.size for g in self.groups)

    @property
    def n_extra(self) -> int:
        """Records beyond the first of each group (the copies, if the first is the original)."""
        return sum(g.size - 1 for g in self.groups)

    def as_dict(self) -> dict:
        return {
            "kind": self.kind,
            "columns": list(self.columns),
            "missing": self.missing,
            "records": self.n_records,
            "groups": [g.as_dict() for g in self.groups],
            "n_groups": self.n_groups,
            "records_in_groups": self.n_in_groups,
            "extra_records": self.n_extra,
        }


def exact_duplicates(frame: pd.DataFrame, columns: Sequence[str] | None = None, *,
                     exclude: Sequence[str] = (), missing: str = "equal",
                     keys: Sequence | None = None) -> DuplicateReport:
    """Groups of records equal on every column (or on every column of ``columns``).

    Parameters
    ----------
    frame : the records, one row each, as loaded.
    columns : compare on exactly these columns (e.g. the feature columns); default all columns.
    exclude : columns left out of the comparison (e.g. a unique record key).
    missing : ``"equal"`` (a missing value matches a missing value) or ``"skip"`` (records with a missing
        value in a compared column are in no group).
    keys : one key per record, reported beside the rows (default: rows only).

    Raises :class:`~investigator.errors.InputError` for an unknown column name.
    """
    chosen = list(frame.columns) if columns is None else _check_columns(frame, columns, "the duplicate check")
    dropped = set(_check_columns(frame, exclude, "the duplicate check")) if exclude else set()
    chosen = [c for c in chosen if c not in dropped]
    if not chosen:
        raise InputError("no columns are left to compare for the duplicate check; exclude fewer columns")
    return _report("exact", frame, chosen, missing, keys)


def duplicates_on(frame: pd.DataFrame, columns: Sequence[str], *, missing: str = "equal",
                  keys: Sequence | None = None) -> DuplicateReport:
    """Groups of records that share the values of the chosen columns (e.g. vendor, amount, date).

    Parameters as in :func:`exact_duplicates`; ``columns`` is required and names at least one column.

    Raises :class:`~investigator.errors.InputError` for an unknown column name or an empty list.
    """
    chosen = _check_columns(frame, columns, "the duplicate check")
    if not chosen:
        raise InputError("name at least one column for the duplicate check, e.g. duplicates=vendor,amount",
                         parameters=("duplicates",))
    return _report("columns", frame, chosen, missing, keys)


# -- helpers -------------------------------------------------------------------------------------------

def _check_columns(frame: pd.DataFrame, columns: Sequence[str] | str, what: str) -> list[str]:
    if isinstance(columns, str):
        columns = [columns]
    # Keep the caller's order, once each.
    names = list(dict.fromkeys(columns))
    available = list(frame.columns)
    unknown = [c for c in names if c not in available]
    if unknown:
        listed = ", ".join(str(c) for c in available)
        raise InputError(f"unknown column{'s' if len(unknown) > 1 else ''} "
                         f"{', '.join(repr(c) for c in unknown)} for {what}; available columns: {listed}")
    return names


def _report(kind: str, frame: pd.DataFrame, columns: list[str], missing: str,
            keys: Sequence | None) -> DuplicateReport:
    if missing not in MISSING_RULES:
        raise InputError(f"missing must be one of {', '.join(MISSING_RULES)}, not {missing!r}")
    n = len(frame)
    if keys is not None and len(keys) != n:
        raise InputError(f"{len(keys)} keys were given for {n} records; give one key per record")
    report = DuplicateReport(kind=kind, columns=[str(c) for c in columns], missing=missing, n_records=n)
    if n < 2:
        return report

    sub = frame[columns]
    candidates = np.arange(n)
    if missing == "skip":
        candidates = np.flatnonzero(~sub.isna().any(axis=1).to_numpy())
        if len(candidates) < 2:
            return report
    # One integer code per distinct value and column (missing is a value of its own), then group the rows of
    # codes: exact equality, with no hashing collisions.
    codes = np.column_stack([_codes(sub.iloc[candidates, j]) for j in range(len(columns))])
    _, inverse, counts = np.unique(codes, axis=0, return_inverse=True, return_counts=True)
    inverse = inverse.ravel()
    repeated = np.flatnonzero(counts > 1)
    if repeated.size == 0:
        return report
    order = np.argsort(inverse, kind="stable")  # rows of a group stay in file order
    starts = np.concatenate([[0], np.cumsum(counts)])
    groups = []
    for g in repeated:
        positions = candidates[order[starts[g]:starts[g + 1]]]
        first = int(positions[0])
        values = {str(c): _plain(sub.iat[first, j]) for j, c in enumerate(columns)}
        groups.append(DuplicateGroup(
            rows=[int(p) + 1 for p in positions], values=values,
            keys=None if keys is None else [_plain(keys[int(p)]) for p in positions]))
    groups.sort(key=lambda grp: grp.rows[0])
    report.groups = groups
    return report


def _codes(column: pd.Series) -> np.ndarray:
    try:
        codes, _ = pd.factorize(column, use_na_sentinel=False)
    except TypeError:
        # Unhashable cells (lists, dicts): compare their text; missing stays missing.
        text = column.map(lambda v: None if _is_missing(v) else repr(v))
        codes, _ = pd.factorize(text, use_na_sentinel=False)
    return codes


def _is_missing(value) -> bool:
    try:
        return bool(pd.isna(value))
    except (TypeError, ValueError):
        return False


def _plain(value):
    """A cell as a JSON-friendly value: missing -> None, numpy scalars -> Python, timestamps -> ISO text."""
    if _is_missing(value):
        return None
    if isinstance(value, pd.Timestamp | np.datetime64):
        return pd.Timestamp(value).isoformat()
    if isinstance(value, pd.Timedelta | np.timedelta64):
        return str(pd.Timedelta(value))
    if hasattr(value, "item"):
        return value.item()
    return value
