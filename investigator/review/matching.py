"""Record fingerprints, the content key of a table, and finding each verdict's record in the current table.

A record is known by its key when the table has an ``--id`` column, otherwise by its content fingerprint:
SHA-256 of its values in a normalised form (column names sorted, values as canonical strings, floats via
``repr``, missing values as empty). Whole-number floats are written as integers, because pandas turns an
integer column into floats as soon as one value is missing: an appended row with a gap must not change the
fingerprint of every other record. Dates and date-times have one text whether the file holds them as date
cells (.xlsx, Parquet) or as ISO 8601 text (CSV): ``2025-03-01``, or ``2025-03-01T14:30:00`` with a time, so
the same records read from a .csv and an .xlsx file have the same fingerprints.

A verdict's fingerprint is computed again from the values stored with it (older stores wrote the dates of a
date cell as ``2025-03-01T00:00:00``): equal values then still give equal fingerprints.

The content key of a table (:func:`content_key`) says whether two tables hold the same records: the review
store of one is found for the other by it (review/stores.py).

Rules (docs/review.md):

- A verdict set with a key is matched by key when the table uses the same ``--id`` column; its record is
  *changed* when its fingerprint differs from the one stored with the verdict (both versions are kept).
- Any other record verdict is matched by fingerprint: identical records share a fingerprint, so the verdict
  applies to every identical copy (``copies`` counts them).
- A verdict that matches no record is *disappeared*: kept and listed with the reason, never dropped.
- When several verdicts match one record, the latest is in force and the others are listed as ``earlier``.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import math
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from datetime import date, datetime, time

import numpy as np
import pandas as pd

from investigator.io.tables import Table
from investigator.review.store import Case, Content, Entry, ReviewStore, key_case_id

HINT_LIMIT = 20  # disappeared verdicts searched for a near match: a full pass each, so a bounded number
# An ISO 8601 date, optionally with a time ("2025-03-01", "2025-03-01T14:30", "2025-03-01 14:30:05.250"); no
# offset, which is kept as written.
_ISO = re.compile(r"(\d{4}-\d{2}-\d{2})(?:[T ](\d{2}):(\d{2})(?::(\d{2})(?:\.(\d{1,9}))?)?)?")
CONTENT_VERSION = "investigator-content-1"  # hashed with the content: a new rule would give new keys


def json_value(value: object) -> object:
    """A cell as a JSON value: numpy scalars to Python, missing to None, infinities and dates to text."""
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if hasattr(value, "item") and not isinstance(value, str | bytes):
        with contextlib.suppress(TypeError, ValueError):
            value = value.item()
    if isinstance(value, bool | int | str):
        return value
    if isinstance(value, float):
        if math.isnan(value):
            return None
        return value if math.isfinite(value) else repr(value)
    if isinstance(value, datetime | date | time):
        return value.isoformat()
    if isinstance(value, bytes):
        return value.decode("utf-8", errors="backslashreplace")
    return str(value)


def canonical(value: object) -> str:
    """The normalised text of a JSON value, as fingerprinted."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return ""
        return str(int(value)) if value.is_integer() else repr(value)
    return iso_text(str(value))


def iso_text(text: str) -> str:
    """An ISO 8601 date or date-time in one form: the date alone at midnight, else ``THH:MM:SS`` and the
    fraction of a second without trailing zeros; any other text as it is."""
    found = _ISO.fullmatch(text)
    if found is None or found.group(2) is None:
        return text
    date, hour, minute, second, fraction = found.groups()
    fraction = (fraction or "").rstrip("0")
    if hour == minute == "00" and (second or "00") == "00" and not fraction:
        return date
    return f"{date}T{hour}:{minute}:{second or '00'}" + (f".{fraction}" if fraction else "")


def column_texts(values: pd.Series) -> list[str]:
    """``canonical(json_value(v))`` of every cell of a column, the same texts, computed per column: numbers
    at once, text and dates once per distinct value."""
    n = len(values)
    dtype = values.dtype
    numpy = isinstance(dtype, np.dtype)
    if n and numpy and dtype.kind == "f":  # a numpy float column
        x = values.to_numpy(dtype=float)
        out = np.full(n, "", dtype=object)
        finite = np.isfinite(x)
        with np.errstate(invalid="ignore"):
            integral = finite & (np.floor(x) == x)
        small = integral & (np.abs(x) < 2.0**53)
        out[small] = x[small].astype(np.int64).astype(str)
        big = integral & ~small
        out[big] = [str(int(v)) for v in x[big].tolist()]
        rest = ~integral & ~np.isnan(x)
        out[rest] = [repr(v) for v in x[rest].tolist()]  # as Python floats: what canonical() gives them
        return out.tolist()
    if n and numpy and dtype.kind in "iu":  # a numpy integer column
        return values.to_numpy().astype(str).tolist()
    if n and (dtype.kind in "Mb" or isinstance(dtype, pd.StringDtype)):  # one type: distinct values at once
        codes, uniques = pd.factorize(values, use_na_sentinel=True)
        texts = np.array([canonical(json_value(u)) for u in uniques] + [""], dtype=object)
        return texts[codes].tolist()  # code -1 (missing) takes the last, ""
    return [canonical(json_value(v)) for v in values.tolist()]


def _digest(pairs: list[tuple[str, str]]) -> str:
    text = json.dumps(pairs, ensure_ascii=False, separators=(",", ":"))  # a list, so no two tables collide
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def fingerprint(values: Mapping[str, object]) -> str:
    """The content fingerprint of one record given as {column: value}."""
    return _digest(sorted((str(k), canonical(json_value(v))) for k, v in values.items()))


def record_values(table: Table, position: int) -> dict:
    """One record's values, {column: JSON value} in file order (cell by cell, so no dtype is mixed up)."""
    frame = table.frame
    return {str(c): json_value(frame.iat[position, j]) for j, c in enumerate(frame.columns)}


def entry_fingerprint(entry: Entry) -> str | None:
    """The fingerprint of a verdict's record as the values stored with it give it now (see the module)."""
    return fingerprint(entry.values) if entry.values is not None else entry.fingerprint


def content_key(table: Table) -> Content:
    """The table's content: SHA-256 of its sorted column names and of the sorted 64-bit hashes of its records.
    A record is hashed with its numbers by value (an integer equals the same whole float, -0 is 0) and its
    other values by the texts its fingerprint is made of (dates in one ISO form). Row order, column order, the
    file's format and the ``--id`` column do not matter; any change of a value does."""
    names = sorted(str(c) for c in table.frame.columns)
    where = {str(c): j for j, c in enumerate(table.frame.columns)}
    parts = {n: _content_column(table.frame.iloc[:, where[n]]) for n in names}
    rows = pd.util.hash_pandas_object(pd.DataFrame(parts), index=False).to_numpy(dtype=np.uint64)
    digest = hashlib.sha256(json.dumps([CONTENT_VERSION, names], ensure_ascii=False).encode("utf-8"))
    digest.update(np.sort(rows).astype("<u8").tobytes())
    return Content(f"sha256:{digest.hexdigest()}", table.n_rows, table.name if table.source.path else None)


def _content_column(values: pd.Series) -> pd.Series:
    """A column as the content key hashes it: numbers as float64 (one NaN for missing), the rest as texts."""
    dtype = values.dtype
    if isinstance(dtype, np.dtype) and dtype.kind in "iuf":
        x = values.to_numpy(dtype=float)
        exact = dtype.kind == "f" or not len(x) or np.abs(x).max() < 2.0**53
        if exact:  # -0.0 + 0.0 is 0.0; every NaN the same NaN, so missing hashes alike
            return pd.Series(np.where(np.isnan(x), np.nan, x + 0.0), dtype=float)
    return pd.Series(column_texts(values), dtype=object)


def record_case(table: Table, position: int) -> Case:
    """The case for the record at 0-based ``position``: by key when the table has one, else by content."""
    values = record_values(table, position)
    digest = fingerprint(values)
    if table.key_column is None:
        return Case(case_id=f"fp:{digest}", kind="record", row=position + 1, fingerprint=digest,
                    values=values)
    key = str(table.keys[position])
    return Case(case_id=key_case_id(table.key_column, key), kind="record", key_column=table.key_column,
                key=key, row=position + 1, fingerprint=digest, values=values)


class _Canon:
    """The whole table's canonical cells, column by column, computed once when a match needs them."""

    def __init__(self, table: Table) -> None:
        names = [str(c) for c in table.frame.columns]
        order = sorted(range(len(names)), key=names.__getitem__)
        self.names = [names[j] for j in order]
        self.cells = [column_texts(table.frame.iloc[:, j]) for j in order]
        self.n = table.n_rows
        self._arrays: list[np.ndarray] | None = None

    def fingerprints(self) -> list[str]:
        if not self.cells:
            return [_digest([])] * self.n
        return [_digest(list(zip(self.names, row, strict=True))) for row in zip(*self.cells, strict=True)]

    def near(self, values: Mapping[str, object]) -> tuple[int, str] | None:
        """The one record that differs from ``values`` in exactly one column, with that column's name."""
        if sorted(values) != self.names or not self.cells:
            return None
        if self._arrays is None:
            self._arrays = [np.array(c, dtype=object) for c in self.cells]
        unequal = np.stack([a != canonical(values[n]) for n, a in zip(self.names, self._arrays, strict=True)])
        ones = np.flatnonzero(unequal.sum(axis=0) == 1)
        if len(ones) != 1:
            return None
        i = int(ones[0])
        return i, self.names[int(np.flatnonzero(unequal[:, i])[0])]


@dataclass
class RecordMatch:
    """The verdict in force for one record of the current table."""

    position: int                 # 0-based
    key: object
    entry: Entry
    matched_by: str               # "key" or "fingerprint"
    changed: bool = False         # key-matched and the content differs from when the verdict was set
    previous: dict | None = None  # the record's values when the verdict was set (when changed)
    current: dict | None = None   # its values now (when changed)
    copies: int = 1               # identical records the verdict applies to (fingerprint match)
    earlier: list[Entry] = field(default_factory=list)  # other verdicts matching it, older than `entry`

    @property
    def row(self) -> int:
        return self.position + 1

    def differences(self) -> list[tuple[str, object, object]]:
        """(column, value then, value now) for every column that changed."""
        return differences(self.previous or {}, self.current or {}) if self.changed else []


@dataclass
class Disappeared:
    """A verdict whose record is not in the current table: kept and listed, with why and a possible match."""

    entry: Entry
    reason: str
    near_row: int | None = None     # the one record differing from it in a single column, if any
    near_column: str | None = None


@dataclass
class Matching:
    """Every current verdict placed against the current table."""

    n_rows: int
    matches: dict[int, RecordMatch]      # 0-based position -> verdict in force
    disappeared: list[Disappeared]
    groups: list[Entry]
    rows_of: dict[str, list[int]]        # case id -> 0-based positions it matched

    def verdicts(self) -> list[str | None]:
        return [m.entry.verdict if (m := self.matches.get(i)) else None for i in range(self.n_rows)]

    def notes(self) -> list[str | None]:
        return [m.entry.note if (m := self.matches.get(i)) else None for i in range(self.n_rows)]

    def changed(self) -> list[RecordMatch]:
        return [m for _, m in sorted(self.matches.items()) if m.changed]


def differences(old: Mapping[str, object], new: Mapping[str, object]) -> list[tuple[str, object, object]]:
    names = list(old) + [n for n in new if n not in old]
    return [(n, old.get(n), new.get(n)) for n in names
            if n not in old or n not in new or canonical(old[n]) != canonical(new[n])]


def match_store(table: Table, store: ReviewStore) -> Matching:
    return match_entries(table, store.current())


def match_entries(table: Table, entries: Iterable[Entry]) -> Matching:
    """Place each case's current entry (``ReviewStore.current()``) against ``table``."""
    entries = list(entries)
    groups = [e for e in entries if e.kind == "group"]
    records = [e for e in entries if e.kind == "record"]
    column = table.key_column
    by_key = [e for e in records if column is not None and e.key_column == column]
    by_content = [e for e in records if not (column is not None and e.key_column == column)]
    hits: dict[int, list[tuple[Entry, str, int]]] = {}
    rows_of: dict[str, list[int]] = {}
    lost: list[tuple[Entry, str]] = []

    if by_key:
        index = {str(k): i for i, k in enumerate(table.keys)}
        for e in by_key:
            i = index.get(e.key) if e.key is not None else None
            if i is None:
                lost.append((e, f"no record with {column} '{e.key}' in {table.name}"))
            else:
                hits.setdefault(i, []).append((e, "key", 1))
                rows_of[e.case_id] = [i]

    canon = _Canon(table) if by_content else None
    if canon is not None:
        positions: dict[str, list[int]] = {}
        for i, digest in enumerate(canon.fingerprints()):
            positions.setdefault(digest, []).append(i)
        for e in by_content:
            found = positions.get(entry_fingerprint(e) or "", [])
            for i in found:
                hits.setdefault(i, []).append((e, "fingerprint", len(found)))
            if found:
                rows_of[e.case_id] = list(found)
            elif e.key_column is not None:
                lost.append((e, f"no record with the same content; it was recorded with --id {e.key_column}: "
                                f"give --id {e.key_column} to match it by key"))
            else:
                lost.append((e, "no record with the same content: it was changed or removed (without --id "
                                "the two cannot be told apart)"))

    matches: dict[int, RecordMatch] = {}
    keys = table.keys
    for i, at_record in hits.items():
        at_record.sort(key=lambda h: h[0].change, reverse=True)
        entry, how, copies = at_record[0]
        match = RecordMatch(i, keys[i], entry, how, copies=copies, earlier=[h[0] for h in at_record[1:]])
        if how == "key":
            now = record_values(table, i)
            then = entry_fingerprint(entry)
            if then is not None and fingerprint(now) != then:
                match.changed, match.previous, match.current = True, entry.values, now
        matches[i] = match

    disappeared = []
    if lost:
        near_by = canon if canon is not None else _Canon(table)
        for n, (e, reason) in enumerate(lost):
            near = near_by.near(e.values) if e.values and n < HINT_LIMIT else None
            disappeared.append(Disappeared(e, reason, *(near[0] + 1, near[1]) if near else ()))
    return Matching(table.n_rows, matches, disappeared, groups, rows_of)
