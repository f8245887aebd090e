"""Verdicts outside the workspace: record one on a record, list the current ones and their history, export
them. Used by the ``verdict`` and ``verdicts`` commands (investigator/cli/review.py) and by the TUI.

Nothing here runs a scan: the table is loaded and the record fingerprinted, nothing is scored. Bad input raises
an InputError before the store is opened, so a rejected command leaves the store as it was.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

from investigator.errors import InputError
from investigator.io.output_files import atomic_output, check_not_input
from investigator.printable import printable
from investigator.review.store import (
    Content,
    Entry,
    ReviewStore,
    check_reviewer,
    check_verdict,
)

EXPORT_FORMATS = (".csv", ".json")
CSV_FIELDS = ("change", "case_id", "kind", "latest", "status", "rows", "key_column", "key", "row_then",
              "verdict", "note", "reviewer", "at", "run_id", "fingerprint", "data_sha256", "values",
              "values_now")


def locate(table, row: int | None, key: str | None) -> int:
    """0-based position of the record given by its 1-based ``row`` or its ``key``."""
    if row is not None:
        if not 1 <= row <= table.n_rows:
            raise InputError(f"{table.name}: row={row} is out of range; rows run from 1 to {table.n_rows}",
                             parameters=("row",))
        return row - 1
    keys = [str(k) for k in table.keys]
    if key not in keys:
        where = f"in column '{table.key_column}'" if table.key_column else \
            "(without `id` a record's key is its row number; give id=COLUMN to use a key column)"
        raise InputError(f"{table.name}: no record with key '{key}' {where}; check the key or use row=N",
                         parameters=("id", "row"))
    return keys.index(key)


def record_verdict(table, position: int, state: str, note: str | None, path: Path, *,
                   reviewer: str | None = None, run_id: str | None = None,
                   content: Content | None = None) -> tuple[Entry, Entry | None]:
    """Save a verdict on the record at 0-based ``position`` of ``table``; return the new entry and the one
    it replaces. Shared by ``investigator verdict`` and the TUI, so both record a case the same way.
    ``content``: the table's content key, if already known (computed otherwise); the store remembers it."""
    # Deferred, here and below: matching and the writers import pandas (0.6 s), and the CLI imports this module
    # for `investigator --help` (0.1 s).
    from investigator.review.matching import content_key, record_case

    state = check_verdict(state)
    if reviewer is not None:
        check_reviewer(reviewer)
    case = record_case(table, position)
    content = content if content is not None else content_key(table)
    with ReviewStore(path, reviewer=reviewer) as store:
        before = store.get(case.case_id)
        entry = store.set(case, state, note, run_id=run_id, data_sha256=table.source.sha256, content=content)
    return entry, before


def record_verdicts(table, positions: list[int], state: str, note: str | None, path: Path, *,
                    reviewer: str | None = None, run_id: str | None = None,
                    content: Content | None = None) -> list[Entry]:
    """One verdict on each record at the 0-based ``positions`` (a marked set, a group's members): one history
    entry per case, all written in one transaction or none. ``note=None`` keeps each record's own note.
    Identical records without a key are one case, so they get one entry."""
    from investigator.review.matching import content_key, record_case  # pandas: deferred, see record_verdict

    state = check_verdict(state)
    if reviewer is not None:
        check_reviewer(reviewer)
    if not positions:
        raise InputError("no records to set a verdict on; mark some first")
    for p in positions:
        if not 0 <= p < table.n_rows:
            raise InputError(f"{table.name}: row={p + 1} is out of range; rows run from 1 to {table.n_rows}",
                             parameters=("row",))
    cases = [record_case(table, p) for p in positions]
    content = content if content is not None else content_key(table)
    with ReviewStore(path, reviewer=reviewer) as store:
        return store.set_many(cases, state, note, run_id=run_id, data_sha256=table.source.sha256,
                              content=content)


# -- what each case's verdict is now -------------------------------------------------------------------------


def case_rows(matching, current: list[Entry]) -> dict[str, dict]:
    """Per case id: status (in force, changed, earlier, disappeared, group), current rows and details."""
    lost = {d.entry.case_id: d for d in matching.disappeared}
    in_force = {m.entry.case_id: m for m in matching.matches.values()}
    cases = {}
    for e in current:
        info: dict = {"status": "", "rows": [r + 1 for r in matching.rows_of.get(e.case_id, [])]}
        if e.kind == "group":
            info["status"] = "group"
        elif e.case_id in lost:
            d = lost[e.case_id]
            info.update(status="disappeared", reason=d.reason,
                        near_row=d.near_row, near_column=d.near_column)
        elif e.case_id in in_force:
            m = in_force[e.case_id]
            info["status"] = "changed" if m.changed else "in force"
            if m.changed:
                info["values_now"] = m.current
                info["changes"] = [{"column": c, "then": a, "now": b} for c, a, b in m.differences()]
        else:
            info["status"] = "earlier"  # its record carries a later verdict from another case
        cases[e.case_id] = info
    return cases


# -- text ----------------------------------------------------------------------------------------------------


def listing(path: Path, table, matching, history: list[Entry], *, exists: bool) -> str:
    if not exists:
        return f"No verdicts yet: there is no review store at {shown(path)}."
    how = f"by key ({shown(table.key_column)})" if table.key_column else "by content (no --id)"
    lines = [f"Review store {shown(path)}: {len(history)} change{'s' * (len(history) != 1)}.",
             "", f"Verdicts on the records of {shown(table.name)}, matched {how}:"]
    if not matching.matches:
        lines.append("  none")
    for _, m in sorted(matching.matches.items()):
        e = m.entry
        lines.append(f"  {where(m.row, table)}: {e.verdict} by {shown(e.reviewer)} at {e.at}"
                     + (f", note '{shown(e.note)}'" if e.note else ""))
        if m.changed:
            lines.append("    CHANGED since the verdict: " + "; ".join(
                f"{shown(c)} {_cell(a)} -> {_cell(b)}" for c, a, b in m.differences()))
        if m.copies > 1:
            same = [r + 1 for r in matching.rows_of.get(e.case_id, [])]
            lines.append(f"    applies to all {m.copies} identical records (rows {row_list(same)})")
        for old in m.earlier:
            lines.append(f"    also matches an earlier verdict: {old.verdict} by {shown(old.reviewer)} at "
                         f"{old.at} ({_label(old.case_id)})")
    if matching.disappeared:
        lines += ["", "Verdicts whose record is not in the data (kept, never dropped):"]
        for d in matching.disappeared:
            e = d.entry
            lines.append(f"  {_label(e.case_id)}: {e.verdict} by {shown(e.reviewer)} at {e.at}"
                         + (f", note '{shown(e.note)}'" if e.note else "") + f"; {d.reason}")
            if d.near_row is not None:
                lines.append(f"    row {d.near_row} differs from it only in {shown(d.near_column)}; "
                             "if that is the same record, set its verdict again")
            if e.values:
                lines.append("    the record then: " + ", ".join(
                    f"{shown(k)}={_cell(v)}" for k, v in e.values.items()))
    if matching.groups:
        lines += ["", "Verdicts on groups:"]
        for e in matching.groups:
            lines.append(f"  {shown(e.case_id)}: {e.verdict} by {shown(e.reviewer)} at {e.at}"
                         + (f", note '{shown(e.note)}'" if e.note else ""))
    lines += ["", "History (every change, oldest first):"]
    for e in history:
        lines.append(f"  #{e.change} {e.at} {shown(e.reviewer)}: {_label(e.case_id)}"
                     + (f" (row {e.row} then)" if e.row is not None else "") + f" -> {e.verdict}"
                     + (f", note '{shown(e.note)}'" if e.note else "")
                     + (f", run {shown(e.run_id)}" if e.run_id else ""))
    return "\n".join(lines)


def where(row: int, table) -> str:
    if table.key_column is None:
        return f"row {row}"
    return f"row {row} ({shown(table.key_column)} {shown(table.keys[row - 1])})"


def row_list(rows: list[int], limit: int = 10) -> str:
    shown = ", ".join(map(str, rows[:limit]))
    return shown + (f", ... ({len(rows)} in all)" if len(rows) > limit else "")


def shown(text: object) -> str:
    """User text on one line, with control characters escaped (no terminal escape sequences get through)."""
    return printable(text)


def _label(case_id: str) -> str:
    """A case id for the screen: content fingerprints shortened (exports keep them whole)."""
    return case_id[:15] + "..." if case_id.startswith("fp:") else shown(case_id)


def _cell(value: object) -> str:
    return "(empty)" if value is None else shown(value)


def identical_rows(table, position: int, digest: str | None) -> list[int]:
    """1-based rows with the same content as the record at ``position`` (cheap pre-filter, then exact)."""
    from investigator.review.matching import fingerprint, record_values  # pandas: deferred, see record_verdict

    frame = table.frame
    target = frame.iloc[position]
    same = (frame.eq(target) | (frame.isna() & target.isna())).all(axis=1).to_numpy().nonzero()[0]
    return [int(i) + 1 for i in same if fingerprint(record_values(table, int(i))) == digest]


# -- export --------------------------------------------------------------------------------------------------


def check_export(export: Path) -> None:
    if export.suffix.lower() not in EXPORT_FORMATS:
        raise InputError(f"export={export}: unknown format '{export.suffix}'; use one of "
                         f"{', '.join(EXPORT_FORMATS)}", parameters=("export",))
    if not export.parent.is_dir():
        raise InputError(f"export={export}: folder {export.parent} does not exist; create it first",
                         parameters=("export",))


def write_export(export: Path, path: Path, table, cases: dict[str, dict], history: list[Entry]) -> None:
    """Write the verdicts of the store at ``path`` on the records of ``table`` to ``export`` (.csv, .json);
    never over the data file or the store."""
    check_not_input(export, [("data file", table.source.path), ("review store", path)], parameter="export")
    with atomic_output(export, parameter="export") as tmp:  # never a half-written export under the real name
        if export.suffix.lower() == ".json":
            latest = {}
            for e in history:
                latest[e.case_id] = e
            data = {
                "store": str(path),
                "data": {"path": table.source.path, "sha256": table.source.sha256,
                         "key": table.key_column or "row"},
                "verdicts": [{**latest[c].as_dict(), **info} for c, info in cases.items()],
                "history": [e.as_dict() for e in history],
            }
            tmp.write_text(json.dumps(data, ensure_ascii=False, indent=1, allow_nan=False) + "\n",
                           encoding="utf-8")
        else:
            _write_csv(tmp, cases, history)


def _write_csv(tmp: Path, cases: dict[str, dict], history: list[Entry]) -> None:
    from investigator.io.writers import neutralise  # pandas: deferred, see record_verdict

    last = {e.case_id: e.change for e in history}
    with tmp.open("w", newline="", encoding="utf-8") as f:
        # Every text cell quoted: with "\n" line ends the csv module would leave a bare CR unquoted.
        writer = csv.writer(f, lineterminator="\n", quoting=csv.QUOTE_NONNUMERIC)
        writer.writerow(CSV_FIELDS)
        for e in history:
            info = cases.get(e.case_id, {})
            latest = last[e.case_id] == e.change
            now = info.get("values_now") if latest else None
            cells = (e.change, e.case_id, e.kind, latest, info.get("status", ""),
                     "; ".join(map(str, info.get("rows", []))), e.key_column, e.key, e.row, e.verdict, e.note,
                     e.reviewer, e.at, e.run_id, e.fingerprint, e.data_sha256,
                     None if e.values is None else json.dumps(e.values, ensure_ascii=False),
                     None if now is None else json.dumps(now, ensure_ascii=False))
            writer.writerow(["" if c is None else neutralise(c) for c in cells])
