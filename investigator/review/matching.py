"""Record fingerprints, and finding each verdict's record in the current table.

A record is known by its key when the table has an ``--id`` column, otherwise by its content fingerprint:
SHA-256 of its values in a normalised form (column names sorted, values as canonical strings, floats via
``repr``, missing values as empty). Whole-number floats are written as integers, because pandas turns an
integer column into floats as soon as one value is missing: an appended row with a gap must not change the
fingerprint of every other record.

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
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from datetime import date, datetime, time

import numpy as np
import pandas as pd

from investigator.io.tables import Table
from investigator.review.store import Case, Entry, ReviewStore, key_case_id

HINT_LIMIT = 20  # disappeared verdicts searched for a near match: a full pass each, so a bounded number


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
    return str(value)


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
        self.cells = [[canonical(json_value(v)) for v in table.frame.iloc[:, j].tolist()] for j in order]
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
            found = positions.get(e.fingerprint or "", [])
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
            if entry.fingerprint is not None and fingerprint(now) != entry.fingerprint:
                match.changed, match.previous, match.current = True, entry.values, now
        matches[i] = match

    disappeared = []
    if lost:
        near_by = canon if canon is not None else _Canon(table)
        for n, (e, reason) in enumerate(lost):
            near = near_by.near(e.values) if e.values and n < HINT_LIMIT else None
            disappeared.append(Disappeared(e, reason, *(near[0] + 1, near[1]) if near else ()))
    return Matching(table.n_rows, matches, disappeared, groups, rows_of)
