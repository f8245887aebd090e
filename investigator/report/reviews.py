"""What the review store says about the scanned records, read once for a report (never written)."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from investigator.errors import InputError
from investigator.review.matching import match_entries
from investigator.review.store import ReviewStore, default_store_path
from investigator.review.verdicts import case_rows


@dataclass
class Review:
    """The store's verdicts placed against the scanned table. ``path`` is None when no store was looked for
    (a scan of a data frame without ``store``); ``exists`` says whether there is one."""

    path: Path | None
    exists: bool = False
    current: list = field(default_factory=list)   # the latest entry of every case
    history: list = field(default_factory=list)   # every change, oldest first
    matching: object | None = None                # review.matching.Matching
    cases: dict[str, dict] = field(default_factory=dict)  # case id -> status, rows, changes (as `verdicts`)

    def match(self, position: int):
        """The verdict in force on the record at 0-based ``position`` (a RecordMatch), or None."""
        return self.matching.matches.get(position) if self.matching is not None else None

    def counts(self) -> dict[str, int]:
        """Verdicts in force on records of the data, by state."""
        out: dict[str, int] = {}
        if self.matching is not None:
            for m in self.matching.matches.values():
                out[m.entry.verdict] = out.get(m.entry.verdict, 0) + 1
        return out


def store_for(result, store: str | Path | None = None) -> Path | None:
    """The store to read: ``store`` if given (it must exist), else the one the scan read, else the default
    beside the data file; None for a data frame."""
    if store is not None:
        path = Path(store)
        if not path.is_file():
            raise InputError(f"store={path}: no review store there; check the path, or leave `store` out to "
                             "use the one beside the data file", parameters=("store",))
        return path
    if result.run.review_store:
        return Path(result.run.review_store)
    source = result.table.source.path
    return default_store_path(source) if source else None


def read_review(result, store: str | Path | None = None) -> Review:
    """Read the store (if there is one) and match its verdicts to the records of ``result``."""
    path = store_for(result, store)
    if path is None or not path.exists():
        return Review(path)
    source = result.table.source.path
    if source and Path(source).exists() and path.resolve() == Path(source).resolve():
        raise InputError(f"store={path}: is the data file itself; give the review store's path",
                         parameters=("store",))
    with ReviewStore(path, create=False) as review:  # create=False: a report never makes a store
        current, history = review.current(), review.history()
    matching = match_entries(result.table, current)
    return Review(path, True, current, history, matching, case_rows(matching, current))
