"""A full disk while a verdict is recorded: one line, exit 2, and the store as it was.

The full disk is SQLite's own: ``PRAGMA max_page_count`` set to the store's current page count on the
connection the store opens, so the next page SQLite needs fails with SQLITE_FULL, "database or disk is full"
(SQLite documentation, "PRAGMA max_page_count" and "Result and Error Codes"; on a real full disk the Unix
VFS reports ENOSPC as the same SQLITE_FULL). A note larger than one page (4096 bytes, SQLite's default page
size) needs a new page. "PRAGMA integrity_check" returns the single row 'ok' on a sound database.
"""

from __future__ import annotations

import sqlite3
from contextlib import closing
from pathlib import Path

import pytest

from fixtures.cli import assert_one_line_error
from investigator.errors import InputError
from investigator.review import Case, ReviewStore
from investigator.review import store as store_module
from investigator.review.store import default_store_path

BIG_NOTE = "n" * 6000  # more than one 4096-byte page


@pytest.fixture
def data(csv_of):
    return csv_of("invoices")


@pytest.fixture
def full_disk(monkeypatch):
    """Every store connection opened from now on can grow by no page (a genuine SQLITE_FULL)."""
    real = sqlite3.connect

    def connect(*args, **kwargs):
        db = real(*args, **kwargs)
        pages = db.execute("PRAGMA page_count").fetchone()[0]
        assert db.execute(f"PRAGMA max_page_count = {pages}").fetchone()[0] == pages
        return db

    def fill() -> None:
        monkeypatch.setattr(store_module.sqlite3, "connect", connect)

    return fill


def read(path: Path) -> tuple[list[tuple], str]:
    """The history (verdict and note of each change) and the integrity check, with plain sqlite3."""
    with sqlite3.connect(path) as db:
        history = db.execute("SELECT case_id, verdict, note FROM history ORDER BY change").fetchall()
        return history, db.execute("PRAGMA integrity_check").fetchone()[0]


def test_verdict_on_a_full_disk_is_one_line_and_keeps_the_store(cli, data, full_disk):
    for row, state, note in (("1", "confirmed", "first note"), ("2", "benign", "second note")):
        code, _, err = cli("verdict", data, "--row", row, "--set", state, "--note", note)
        assert code == 0, err
    store = default_store_path(data)
    before, ok = read(store)
    assert ok == "ok" and len(before) == 2
    full_disk()
    code, _, err = cli("verdict", data, "--row", "3", "--set", "follow-up", "--note", BIG_NOTE)
    assert code == 2, err
    assert_one_line_error(err, str(store), "is full", "nothing was saved")
    assert "rollback" not in err
    after, ok = read(store)
    assert ok == "ok"
    assert after == before  # earlier verdicts and notes all there, the failed one not half-written
    code, out, _ = cli("verdicts", data)
    assert code == 0 and "first note" in out and "second note" in out


def test_store_set_on_a_full_disk_raises_input_error(tmp_path, full_disk):
    path = tmp_path / "s.sqlite"
    with ReviewStore(path) as store:
        store.set(Case(case_id="group:1", kind="group"), "benign", "kept")
    full_disk()
    with ReviewStore(path) as store, pytest.raises(InputError, match="is full") as caught:
        store.set(Case(case_id="group:2", kind="group"), "confirmed", BIG_NOTE)
    assert caught.value.parameters == ("store",)
    assert read(path) == ([("group:1", "benign", "kept")], "ok")


@pytest.mark.parametrize("pages", [1, 2, 3])  # room for none, one or two of the tables it needs
def test_a_store_that_cannot_be_created_on_a_full_disk(tmp_path, monkeypatch, pages):
    # A new store on a disk with room for one page only: creating the schema fails as a whole (one
    # transaction), so once there is room the same file opens as a new, empty store.
    real = sqlite3.connect

    def connect(*args, **kwargs):
        db = real(*args, **kwargs)
        db.execute(f"PRAGMA max_page_count = {pages}")
        return db

    path = tmp_path / "new.sqlite"
    monkeypatch.setattr(store_module.sqlite3, "connect", connect)
    with pytest.raises(InputError, match="is full") as caught:
        ReviewStore(path)
    assert "rollback" not in str(caught.value)
    monkeypatch.setattr(store_module.sqlite3, "connect", real)
    # All or nothing: the failed creation left no half-made schema (no table, no index) in the file.
    if path.exists():
        with closing(real(path)) as db:
            assert db.execute("SELECT name FROM sqlite_master").fetchall() == []
    with ReviewStore(path) as store:
        assert store.history() == []
        store.set(Case(case_id="group:1", kind="group"), "open")
    assert read(path) == ([("group:1", "open", "")], "ok")
