"""The slow work the app runs in worker threads: loading, scanning, explaining, saving verdicts.

Plain functions over the engine; they import it lazily so the first frame does not wait for pandas and
scikit-learn (the review store, the standard library's SQLite, is imported at the top). Errors the user can
fix arrive as InputError with one line.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # the engine is imported in the workers only
    from investigator.structure.cases import GroupCase

from investigator.review.store import ReviewStore, check_verdict, default_store_path, group_case
from investigator.review.verdicts import record_verdict
from investigator.tui.models.cases import cases_data
from investigator.tui.models.columns import column_rows


class ScanCancelled(Exception):
    """Raised from the progress callback when the user cancelled the scan."""


@dataclass
class Loaded:
    table: object
    rows: list     # ColumnRow
    options: object  # the ScanOptions the file was read with


def load(path: str | Path, options, columns=None, where: str | None = None) -> Loaded:
    """Read the table and infer the roles. ``options`` is a ScanOptions or a dict of its fields: building
    it here keeps the options module (which imports the methods, hence SciPy) off the first frame.
    ``columns`` (the input columns Cases shows) and ``where`` (its first filter) are checked against the
    table here, so a wrong name is a one-line error before any scan."""
    # Deferred: these run in a worker thread, and at the top they would hold up the first frame: the options
    # import the methods (SciPy), 1.7 s, and the table reader pandas, 0.6 s (`python -c "import X"` here).
    from investigator.io.tables import load_table
    from investigator.pipeline.options import ScanOptions
    from investigator.prepare.roles import assign_roles

    if not isinstance(options, ScanOptions):
        options = ScanOptions(**(options or {}))
    table = load_table(path, sheet=options.sheet, id_column=options.id, decimal=options.decimal,
                       header_row=options.header_row)
    if columns is not None or where is not None:
        from investigator.output.columns import check_where_columns, choose_columns  # with pandas: loaded here
        from investigator.output.where import parse_where

        choose_columns(table, columns)
        if where is not None:
            check_where_columns(parse_where(where), table)
    roles = assign_roles(table, options.features, options.exclude)
    return Loaded(table, column_rows(table, roles), options)


class CancelToken:
    def __init__(self) -> None:
        self._event = threading.Event()

    def cancel(self) -> None:
        self._event.set()

    @property
    def cancelled(self) -> bool:
        return self._event.is_set()


def run(table, options, progress, token: CancelToken, store: Path | None, path: str | Path | None):
    """Scan ``table``; ``progress(stage, fraction)`` is the engine's callback. The scan stops at the next
    progress report after ``token.cancel()`` (the engine reports between its steps)."""
    from investigator.pipeline.engine import attach_verdicts, run_scan  # 1.9 s to import; deferred as in load

    def report(stage: str, fraction: float) -> None:
        if token.cancelled:
            raise ScanCancelled
        progress(stage, fraction)

    result = run_scan(table, options, report)
    if token.cancelled:
        raise ScanCancelled
    if path is not None:
        attach_verdicts(result, path, store)
    report("preparing the cases", 1.0)
    return result, cases_data(result)


def save_verdict(table, position: int, state: str, note: str | None, store: Path, run_id: str | None):
    """Save one verdict (the same function ``investigator verdict`` uses) and re-match the store, so copies
    that share a fingerprint show it too. Returns (entry, verdicts, notes)."""
    from investigator.review.matching import match_store  # pandas: 0.6 s, deferred as in load

    entry, _ = record_verdict(table, position, state, note, store, run_id=run_id)
    with ReviewStore(store, create=False) as review:
        matching = match_store(table, review)
    return entry, matching.verdicts(), matching.notes()


def save_group_verdict(case: GroupCase, state: str, note: str | None, store: Path, run_id: str | None,
                       data_sha256: str | None):
    """Save a verdict on a group case (``group:<id>``, its members' keys kept with it)."""
    state = check_verdict(state)
    with ReviewStore(store) as review:
        return review.set(group_case(f"group:{case.group}", case.keys), state, note, run_id=run_id,
                          data_sha256=data_sha256)


def group_verdict(case: GroupCase, store: Path) -> str | None:
    """The group's current verdict, if the store has one."""
    if not Path(store).exists():
        return None
    with ReviewStore(store, create=False) as review:
        entry = review.get(f"group:{case.group}")
    return entry.verdict if entry is not None else None


def store_for(path: str | Path, store: str | Path | None) -> Path:
    return Path(store) if store else default_store_path(path)
