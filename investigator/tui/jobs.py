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

import numpy as np

if TYPE_CHECKING:  # the engine is imported in the workers only
    from investigator.structure.cases import GroupCase

from investigator.review.store import ReviewStore, check_verdict, group_case
from investigator.review.verdicts import record_verdict, record_verdicts
from investigator.tui.models.cases import cases_data
from investigator.tui.models.columns import column_rows
from investigator.tui.models.map import MapPoints


class ScanCancelled(Exception):
    """Raised from the progress callback when the user cancelled the scan."""


class MapCancelled(Exception):
    """Raised from the map's progress callback when the user stopped the UMAP map."""


@dataclass
class Loaded:
    table: object
    rows: list     # ColumnRow: the columns the fit uses (the reference's, with one)
    options: object  # the ScanOptions the file was read with
    reference: object = None  # with `open --reference`: the reference Table the records are scored against
    store: object = None  # review.stores.StoreChoice: where the verdicts are read and written


def load(path: str | Path, options, columns=None, where: str | None = None, *, reference: str | Path | None = None,
         reference_sheet: str | None = None, store: str | Path | None = None) -> Loaded:
    """Read the table (and the reference, if any), infer the roles and find the review store. ``options`` is a
    ScanOptions or a dict of its fields: building it here keeps the options module (which imports the methods,
    hence SciPy) off the first frame. ``columns`` (the input columns Cases shows) and ``where`` (its first
    filter) are checked against the table here, so a wrong name is a one-line error before any scan."""
    # Deferred: these run in a worker thread, and at the top they would hold up the first frame: the options
    # import the methods (SciPy), 1.7 s, and the table reader pandas, 0.6 s (`python -c "import X"` here).
    from investigator.io.tables import load_table
    from investigator.pipeline.options import ScanOptions
    from investigator.prepare.roles import assign_roles
    from investigator.review.stores import find_store

    if not isinstance(options, ScanOptions):
        options = ScanOptions(**(options or {}))
    ref = None
    if reference is not None:
        # Deferred as above (the engine: 1.9 s); the reference is read as `check` reads it.
        from investigator.pipeline.engine import check_tables

        table, ref = check_tables(path, reference, options, reference_sheet=reference_sheet)
    else:
        table = load_table(path, sheet=options.sheet, id_column=options.id, decimal=options.decimal,
                           header_row=options.header_row)
    if columns is not None or where is not None:
        from investigator.output.columns import check_where_columns, choose_columns  # with pandas: loaded here
        from investigator.output.where import parse_where

        choose_columns(table, columns)
        if where is not None:
            check_where_columns(parse_where(where), table)
    fit = ref if ref is not None else table  # the roles the fit uses: the reference's, as in check
    roles = assign_roles(fit, options.features, options.exclude)
    return Loaded(table, column_rows(fit, roles), options, ref, find_store(table, path, store))


class CancelToken:
    def __init__(self) -> None:
        self._event = threading.Event()

    def cancel(self) -> None:
        self._event.set()

    @property
    def cancelled(self) -> bool:
        return self._event.is_set()


def run(table, options, progress, token: CancelToken, store: Path | None, path: str | Path | None,
        reference=None, learn: bool = True, cache: bool | str = True):
    """Scan ``table`` (against ``reference``, a Table, when given: the fit of ``check``); ``progress(stage,
    fraction)`` is the engine's callback. The scan stops at the next progress report after ``token.cancel()``
    (the engine reports between its steps). ``store``: the review store to read, when it exists. Returns the
    result, the Cases data and the table's content key (which a verdict records)."""
    from investigator.pipeline.engine import attach_verdicts, run_scan  # 1.9 s to import; deferred as in load
    from investigator.pipeline.scan_cache import cache_entry  # 0.1 s alone (NumPy); loaded with the engine
    from investigator.review.matching import content_key

    def report(stage: str, fraction: float) -> None:
        if token.cancelled:
            raise ScanCancelled
        progress(stage, fraction)

    # The kept scan of the same file with the same options, when there is one (pipeline/scan_cache.py; `cache`:
    # the engine's, "refresh" with `open --fresh`); a scan against a reference is not kept.
    kept = cache_entry(path, options, cache) if path is not None and reference is None else None
    result = kept.load() if kept is not None else None
    if result is None:
        result = run_scan(table, options, report, reference=reference)
        if kept is not None and not token.cancelled:
            kept.save(result)
    if token.cancelled:
        raise ScanCancelled
    if path is not None and store is not None:
        attach_verdicts(result, path, store, learn=learn)
    report("preparing the cases", 1.0)
    return result, cases_data(result), content_key(table)


def umap_map(result, progress, token: CancelToken) -> MapPoints:
    """The UMAP map of the scan's prepared features, as ``scan --map auto`` makes it (same seed, the flagged
    records kept in the fit on large data): PCA instead where ``auto`` chooses it (under 100 records or at
    most two features). ``progress(stage, fraction)`` between its steps; after ``token.cancel()`` the next
    step raises MapCancelled (the UMAP fit itself is one step: it runs to its end, and its result is dropped)."""
    # Deferred: scikit-learn's neighbour search 0.4 s, umap-learn 1.5-3.9 s (structure/map.py); the Map
    # screen shows the principal components meanwhile.
    from investigator.structure.map import embed

    def report(stage: str, fraction: float) -> None:
        if token.cancelled:
            raise MapCancelled
        progress(stage, fraction)

    X = np.nan_to_num(np.asarray(result.features.values, dtype=float))
    mapped = embed(X, "auto", seed=result.options.seed, keep=np.asarray(result.flagged, dtype=bool),
                   progress=report)
    if token.cancelled:
        raise MapCancelled
    if mapped.method == "umap":
        return MapPoints(mapped.coords, "the UMAP map of the features", "computed")
    why = "; ".join(mapped.notices) or "PCA"
    return MapPoints(mapped.coords, f"principal components of the features ({why})", "computed")


def save_verdict(table, position: int, state: str, note: str | None, store: Path, run_id: str | None,
                 content=None):
    """Save one verdict (the same function ``investigator verdict`` uses) and re-match the store, so copies
    that share a fingerprint show it too. Returns (entry, verdicts, notes)."""
    from investigator.review.matching import match_store  # pandas: 0.6 s, deferred as in load

    entry, _ = record_verdict(table, position, state, note, store, run_id=run_id, content=content)
    with ReviewStore(store, create=False) as review:
        matching = match_store(table, review)
    return entry, matching.verdicts(), matching.notes()


def relearn(result, store: Path, version: int):
    """The priority learned from the store's verdicts now (docs/learning.md), after a verdict: the store is
    read, never written, and ``result`` is not changed here (the UI thread sets what this returns). Returns
    (version, learning or None, its run record section or None)."""
    from investigator.pipeline.priority import learn  # with the engine, loaded by the scan already
    from investigator.review.matching import match_store  # pandas: deferred as in save_verdict

    with ReviewStore(store, create=False) as review:
        matching = match_store(result.table, review)
    learning = learn(result, matching, result.learning)
    return version, learning, learning.describe() if learning is not None else None


def save_verdicts(table, positions: list[int], state: str, note: str | None, store: Path, run_id: str | None,
                  content=None):
    """One verdict on each of several records (a marked set, a group's members), one history entry each, in
    one transaction; then re-match the store. Returns (entries, verdicts, notes)."""
    from investigator.review.matching import match_store  # pandas: deferred as in save_verdict

    entries = record_verdicts(table, positions, state, note, store, run_id=run_id, content=content)
    with ReviewStore(store, create=False) as review:
        matching = match_store(table, review)
    return entries, matching.verdicts(), matching.notes()


def save_group_verdict(case: GroupCase, state: str, note: str | None, store: Path, run_id: str | None,
                       data_sha256: str | None, content=None):
    """Save a verdict on a group case (``group:<id>``, its members' keys kept with it)."""
    state = check_verdict(state)
    with ReviewStore(store) as review:
        return review.set(group_case(f"group:{case.group}", case.keys), state, note, run_id=run_id,
                          data_sha256=data_sha256, content=content)


def group_verdict(case: GroupCase, store: Path) -> str | None:
    """The group's current verdict, if the store has one."""
    if not Path(store).exists():
        return None
    with ReviewStore(store, create=False) as review:
        entry = review.get(f"group:{case.group}")
    return entry.verdict if entry is not None else None
