"""Which review store holds the verdicts of a table: the one named for its file, else the one of the same
records under another name (docs/review.md, "Which store").

1. ``store=PATH`` given: that one.
2. The store named for the data file (``claims.xlsx.investigation.sqlite``), when it exists, whatever it
   holds: a store found by name is always used, even when the data changed since (its verdicts are matched
   record by record, changed and removed records shown as such).
3. Else a store of another file in the same folder (``*.investigation.sqlite``) that remembers a verdict
   recorded on the same content (:func:`investigator.review.matching.content_key`): the same records read
   from ``claims.csv``. When several do, the one with the latest verdict.
4. Else none yet: the first verdict creates the store named for the data file.

Looking is reading: no store is created or changed here. A store of another file that cannot be read is
passed over (it is not this table's); the data file's own store, damaged, is refused with one line.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from investigator.errors import InputError
from investigator.io.tables import Table
from investigator.review.matching import content_key
from investigator.review.store import STORE_SUFFIX, Content, ReviewStore, default_store_path

GIVEN, BY_NAME, BY_CONTENT, NEW = "given", "name", "content", "new"


@dataclass(frozen=True)
class StoreChoice:
    """The store a table's verdicts are read from and written to, and how it was found (``given``, ``name``,
    ``content`` or ``new``). ``content``: the table's content key, when finding the store needed it."""

    path: Path
    how: str
    content: Content | None = None

    @property
    def exists(self) -> bool:
        return self.path.exists()

    @property
    def by_content(self) -> bool:
        """Found as the store of the same records under another file name."""
        return self.how == BY_CONTENT

    def describe(self, data_name: str | None = None) -> str:
        """How it was found, in words (for a notice or a listing)."""
        if self.how == BY_CONTENT:
            return (f"verdicts from the review store {self.path.name}, which holds verdicts on the same records "
                    f"as {data_name or 'the data'} (matched by content, not by file name); new ones go there too")
        if self.how == NEW:
            return f"no review store yet; the first verdict creates {self.path.name}"
        return f"review store {self.path.name}"


def find_store(table: Table, data: str | Path | None, store: str | Path | None = None) -> StoreChoice | None:
    """The store of ``table`` read from ``data`` (rules in the module docstring); None for a data frame
    without ``store``."""
    if store is not None:
        return StoreChoice(Path(store), GIVEN)
    if not isinstance(data, str | Path):
        return None
    own = default_store_path(data)
    if own.exists():
        return StoreChoice(own, BY_NAME)
    candidates = []
    folder = own.parent
    for path in sorted(folder.glob("*" + STORE_SUFFIX)) if folder.is_dir() else []:
        if path == own or not path.is_file():
            continue
        try:
            with ReviewStore(path, create=False) as other:
                contents, last = other.contents(), other.last_change()
        except InputError:  # another file's store, unreadable: not this table's, and not ours to refuse
            continue
        if any(c.records == table.n_rows for c in contents):  # the cheap test first
            candidates.append((path, {c.key for c in contents}, last or ""))
    if not candidates:
        return StoreChoice(own, NEW)
    content = content_key(table)
    same = [(last, path) for path, keys, last in candidates if content.key in keys]
    if not same:
        return StoreChoice(own, NEW, content)
    same.sort(key=lambda found: (found[0], str(found[1])))  # the latest verdict last; ties by name
    return StoreChoice(same[-1][1], BY_CONTENT, content)
