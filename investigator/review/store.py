"""The review store: verdicts and notes in one SQLite file, with an append-only history.

Every change is one row of ``history``, written in its own transaction; nothing is ever updated or deleted
(triggers refuse it). The view ``current_verdicts`` gives the latest row per case. WAL mode lets a reader
(the TUI) and a writer (a CLI command) work at once, and ``busy_timeout`` makes two writers wait for each
other instead of failing (SQLite documentation: "Write-Ahead Logging", "PRAGMA busy_timeout").

A write that fails (a full disk, SQLITE_FULL) leaves the store as it was: SQLite rolls the transaction back,
sometimes by itself ("Response To Errors Within A Transaction"), so the rollback here is done only while a
transaction is still open, and the user gets the one-line reason rather than the rollback's own complaint.

Only the standard library is imported here, so ``investigator --help`` stays fast.
"""

from __future__ import annotations

import getpass
import json
import sqlite3
import threading
import time
from collections.abc import Iterator
from contextlib import contextmanager, suppress
from dataclasses import asdict, dataclass
from datetime import UTC, datetime
from pathlib import Path

from investigator.errors import InputError

# Our own states, plain words. `open` exists because history is append-only: it is how a reviewer withdraws
# a verdict set by mistake (or reopens a case) without deleting anything.
VERDICTS = ("open", "confirmed", "benign", "follow-up")
VERDICT_MEANING = {
    "open": "not decided yet, or reopened",
    "confirmed": "the lead holds: an error, a problem or a case to act on",
    "benign": "looked at and explained; nothing to act on",
    "follow-up": "needs more information or someone else's look",
}
STORE_SUFFIX = ".investigation.sqlite"
SCHEMA_VERSION = 1
APPLICATION_ID = 0x496E7652  # "InvR" in the header (SQLite file format, offset 68): marks the file as ours
BUSY_TIMEOUT_MS = 15_000     # a writer waits this long for another before giving up with a one-line error

_SCHEMA = (
    "CREATE TABLE IF NOT EXISTS meta (name TEXT PRIMARY KEY, value TEXT NOT NULL)",
    """CREATE TABLE IF NOT EXISTS history (
        change      INTEGER PRIMARY KEY AUTOINCREMENT,
        case_id     TEXT NOT NULL,
        kind        TEXT NOT NULL CHECK (kind IN ('record', 'group')),
        key_column  TEXT,
        record_key  TEXT,
        row         INTEGER,
        verdict     TEXT NOT NULL,
        note        TEXT NOT NULL,
        reviewer    TEXT NOT NULL,
        at          TEXT NOT NULL,
        run_id      TEXT,
        fingerprint TEXT,
        record_json TEXT,
        data_sha256 TEXT
    )""",
    "CREATE INDEX IF NOT EXISTS history_case ON history (case_id, change)",
    """CREATE TRIGGER IF NOT EXISTS history_no_update BEFORE UPDATE ON history
       BEGIN SELECT RAISE(ABORT, 'history is append-only'); END""",
    """CREATE TRIGGER IF NOT EXISTS history_no_delete BEFORE DELETE ON history
       BEGIN SELECT RAISE(ABORT, 'history is append-only'); END""",
    """CREATE VIEW IF NOT EXISTS current_verdicts AS
       SELECT h.* FROM history AS h
       JOIN (SELECT case_id, MAX(change) AS last FROM history GROUP BY case_id) AS l ON h.change = l.last""",
)
# The contents the store's verdicts were recorded on (review/stores.py finds a store by them). Added after schema
# 1 was first written; additive, so a store without it is still schema 1: it is made with the next verdict.
_CONTENTS = (
    """CREATE TABLE IF NOT EXISTS contents (
        content TEXT PRIMARY KEY,
        records INTEGER NOT NULL,
        name    TEXT,
        at      TEXT NOT NULL
    )""",
    """CREATE TRIGGER IF NOT EXISTS contents_no_update BEFORE UPDATE ON contents
       BEGIN SELECT RAISE(ABORT, 'contents are append-only'); END""",
    """CREATE TRIGGER IF NOT EXISTS contents_no_delete BEFORE DELETE ON contents
       BEGIN SELECT RAISE(ABORT, 'contents are append-only'); END""",
)
_COLUMNS = ("change, case_id, kind, key_column, record_key, row, verdict, note, reviewer, at, run_id, "
            "fingerprint, record_json, data_sha256")


def default_store_path(data_path: str | Path) -> Path:
    """The store beside the data file: ``claims.csv`` -> ``claims.csv.investigation.sqlite``."""
    path = Path(data_path)
    return path.with_name(path.name + STORE_SUFFIX)


def check_verdict(state: str) -> str:
    """The state in its stored form; unknown states raise an InputError listing the valid ones."""
    word = state.strip().lower() if isinstance(state, str) else state
    if word not in VERDICTS:
        raise InputError(f"unknown verdict '{state}'; use one of: {', '.join(VERDICTS)}")
    return word


def default_reviewer() -> str:
    """The OS user, or 'unknown' where none is set (getpass raises when no variable or account names one)."""
    try:
        name = getpass.getuser()
    except Exception:
        name = ""
    return name.strip() or "unknown"


def check_reviewer(name: str) -> str:
    if not isinstance(name, str) or not name.strip() or any(c in name for c in "\r\n"):
        raise InputError(f"reviewer={name!r}: give a name on one line (default: the OS user)",
                         parameters=("reviewer",))
    return name.strip()


@dataclass(frozen=True)
class Case:
    """What a verdict is about: a record (``kind='record'``) or a group of records (``kind='group'``).

    ``case_id`` identifies the case across runs: ``key:<column>:<key>`` for a record known by its key,
    ``fp:<sha256>`` for a record known by its content, ``group:<id>`` for a group. ``values`` holds the
    record's values (or a group's members) as they were when the verdict was set.
    """

    case_id: str
    kind: str
    key_column: str | None = None
    key: str | None = None
    row: int | None = None
    fingerprint: str | None = None
    values: dict | None = None


def key_case_id(key_column: str, key: object) -> str:
    # ':' and '\' in the column name are escaped so the first bare ':' always ends it.
    column = key_column.replace("\\", "\\\\").replace(":", "\\:")
    return f"key:{column}:{key}"


def group_case(group_id: str, members: list | None = None) -> Case:
    """A group case, e.g. ``group_case("group:3", members=["C0012", "C0040"])``."""
    if not (isinstance(group_id, str) and group_id.startswith("group:") and group_id[6:].strip()
            and "\n" not in group_id):
        raise InputError(f"group id {group_id!r}: use 'group:' followed by the group's name, e.g. 'group:3'")
    return Case(case_id=group_id, kind="group",
                values={"members": [str(m) for m in members]} if members is not None else None)


@dataclass(frozen=True)
class Content:
    """What a table holds, as the store remembers it: ``key`` (``sha256:...``, :func:`investigator.review.
    matching.content_key`), the number of ``records`` and the file ``name`` it was read from."""

    key: str
    records: int
    name: str | None = None


@dataclass(frozen=True)
class Entry:
    """One change in the history (and, from ``current()``, a case's latest change)."""

    change: int
    case_id: str
    kind: str
    key_column: str | None
    key: str | None
    row: int | None
    verdict: str
    note: str
    reviewer: str
    at: str
    run_id: str | None
    fingerprint: str | None
    values: dict | None
    data_sha256: str | None

    def as_dict(self) -> dict:
        return asdict(self)


def _entry(row: tuple) -> Entry:
    values = json.loads(row[12]) if row[12] is not None else None
    return Entry(*[*row[:12], values, row[13]])


class ReviewStore:
    """Verdicts and notes of one investigation, in one SQLite file.

    ``ReviewStore(path)`` opens the store, creating it when missing (``create=False`` refuses instead).
    Use it as a context manager or call ``close()``. Safe to share between threads of one process.
    """

    def __init__(self, path: str | Path, *, reviewer: str | None = None, create: bool = True) -> None:
        self.path = Path(path)
        self.reviewer = check_reviewer(reviewer) if reviewer is not None else default_reviewer()
        self._lock = threading.Lock()
        if self.path.is_dir():
            raise InputError(f"review store {self.path}: is a folder; give a file path with store=PATH",
                             parameters=("store",))
        if not self.path.parent.is_dir():
            raise InputError(f"review store {self.path}: folder {self.path.parent} does not exist or is "
                             "not a folder; create it or give another store=PATH", parameters=("store",))
        if not create and not self.path.exists():
            raise InputError(f"review store {self.path}: does not exist; record a verdict first")
        self._db = self._open()

    # -- opening -------------------------------------------------------------------------------------
    def _open(self) -> sqlite3.Connection:
        try:
            db = sqlite3.connect(self.path, timeout=BUSY_TIMEOUT_MS / 1000, isolation_level=None,
                                 check_same_thread=False)
        except sqlite3.Error as exc:
            raise _store_error(self.path, exc) from None
        # Opening a fresh store while another process switches it to WAL can report "locked" without
        # waiting (SQLite does not call the busy handler there, to avoid deadlock): retry, within the timeout.
        deadline = time.monotonic() + BUSY_TIMEOUT_MS / 1000
        while True:
            try:
                self._prepare(db)
                return db
            except sqlite3.OperationalError as exc:
                if _busy(exc) and time.monotonic() < deadline:
                    time.sleep(0.02)
                    continue
                db.close()
                raise _store_error(self.path, exc) from None
            except sqlite3.Error as exc:
                db.close()
                raise _store_error(self.path, exc) from None
            except BaseException:
                db.close()
                raise

    def _prepare(self, db: sqlite3.Connection) -> None:
        db.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
        tables = {r[0] for r in db.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
        app_id = db.execute("PRAGMA application_id").fetchone()[0]
        if (tables - {"sqlite_sequence"} and not {"meta", "history"} <= tables) or \
                app_id not in (0, APPLICATION_ID):
            raise InputError(f"review store {self.path}: is a SQLite database of another program; "
                             "give another store=PATH", parameters=("store",))
        if db.execute("PRAGMA journal_mode").fetchone()[0].lower() != "wal":
            db.execute("PRAGMA journal_mode = WAL")
        # FULL: a commit that returned survives a power cut too, not only a killed process.
        db.execute("PRAGMA synchronous = FULL")
        if "history" not in tables:
            self._create(db)
        version = db.execute("SELECT value FROM meta WHERE name = 'schema_version'").fetchone()
        if version is None:
            raise InputError(f"review store {self.path}: has no schema version; it was not written by "
                             "investigator, give another store=PATH", parameters=("store",))
        if int(version[0]) > SCHEMA_VERSION:
            raise InputError(f"review store {self.path}: written by a newer investigator (schema "
                             f"{version[0]}); upgrade investigator to read it")

    @staticmethod
    def _create(db: sqlite3.Connection) -> None:
        db.execute("BEGIN IMMEDIATE")  # another process may be creating it too: IF NOT EXISTS settles it
        try:
            for statement in _SCHEMA + _CONTENTS:
                db.execute(statement)
            db.execute("INSERT OR IGNORE INTO meta VALUES ('schema_version', ?)", (str(SCHEMA_VERSION),))
            db.execute(f"PRAGMA application_id = {APPLICATION_ID}")
            db.execute("COMMIT")
        except BaseException:
            _rollback(db)
            raise

    def close(self) -> None:
        with self._lock:
            self._db.close()

    def __enter__(self) -> ReviewStore:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    # -- writing -------------------------------------------------------------------------------------
    @contextmanager
    def _transaction(self) -> Iterator[sqlite3.Connection]:
        """One write transaction; IMMEDIATE takes the write lock first, so a read-then-insert is atomic."""
        with self._lock:
            try:
                self._begin()
                try:
                    yield self._db
                    self._db.execute("COMMIT")
                except BaseException:
                    _rollback(self._db)
                    raise
            except sqlite3.Error as exc:
                raise _store_error(self.path, exc) from None

    def _begin(self) -> None:
        # BEGIN waits through busy_timeout; the retry covers the few cases SQLite reports busy at once.
        deadline = time.monotonic() + BUSY_TIMEOUT_MS / 1000
        while True:
            try:
                self._db.execute("BEGIN IMMEDIATE")
                return
            except sqlite3.OperationalError as exc:
                if not (_busy(exc) and time.monotonic() < deadline):
                    raise
                time.sleep(0.02)

    def set(self, case: Case, verdict: str, note: str | None = None, *, reviewer: str | None = None,
            run_id: str | None = None, data_sha256: str | None = None, content: Content | None = None) -> Entry:
        """Record a verdict on ``case`` and return the new history entry.

        ``note=None`` keeps the case's current note (a new verdict does not erase what was written);
        ``note=""`` clears it. ``run_id`` names the scan the reviewer was looking at, when there is one.
        ``content``: the table the case is in, remembered so that the same records read from another file
        find this store (docs/review.md).
        """
        return self.set_many([case], verdict, note, reviewer=reviewer, run_id=run_id, data_sha256=data_sha256,
                             content=content)[0]

    def set_many(self, cases: list[Case], verdict: str, note: str | None = None, *, reviewer: str | None = None,
                 run_id: str | None = None, data_sha256: str | None = None,
                 content: Content | None = None) -> list[Entry]:
        """Record one verdict on each of ``cases`` (one history entry each), all in one transaction: every
        entry is written, or none. ``note=None`` keeps each case's own current note; the rest as :meth:`set`.
        A case listed twice gets one entry."""
        verdict = check_verdict(verdict)
        who = check_reviewer(reviewer) if reviewer is not None else self.reviewer
        if note is not None and not isinstance(note, str):
            raise TypeError("note must be a string or None")
        for case in cases:
            if case.kind not in ("record", "group"):
                raise ValueError(f"case kind must be 'record' or 'group', not {case.kind!r}")
        unique: dict[str, Case] = {}
        for case in cases:  # in the order given, the first of each case id
            unique.setdefault(case.case_id, case)
        at = datetime.now(UTC).isoformat(timespec="milliseconds")
        entries = []
        with self._transaction() as db:
            if content is not None:
                for statement in _CONTENTS:  # a store made before the contents table gets it now
                    db.execute(statement)
                db.execute("INSERT OR IGNORE INTO contents VALUES (?, ?, ?, ?)",
                           (content.key, int(content.records), content.name, at))
            for case in unique.values():
                kept = note
                if kept is None:
                    last = db.execute("SELECT note FROM history WHERE case_id = ? ORDER BY change DESC LIMIT 1",
                                      (case.case_id,)).fetchone()
                    kept = last[0] if last else ""
                values = None if case.values is None else json.dumps(case.values, ensure_ascii=False,
                                                                     allow_nan=False)
                cursor = db.execute(
                    f"INSERT INTO history ({_COLUMNS}) VALUES (NULL, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                    (case.case_id, case.kind, case.key_column, case.key, case.row, verdict, kept, who, at,
                     run_id, case.fingerprint, values, data_sha256),
                )
                change = cursor.lastrowid
                assert change is not None  # set by every INSERT
                entries.append(Entry(change, case.case_id, case.kind, case.key_column, case.key, case.row, verdict,
                                     kept, who, at, run_id, case.fingerprint, case.values, data_sha256))
        return entries

    # -- reading -------------------------------------------------------------------------------------
    def _select(self, sql: str, params: tuple = ()) -> list[Entry]:
        with self._lock:
            try:
                return [_entry(r) for r in self._db.execute(sql, params).fetchall()]
            except sqlite3.Error as exc:
                raise _store_error(self.path, exc) from None

    def current(self) -> list[Entry]:
        """The latest entry of every case, oldest case first."""
        return self._select(f"SELECT {_COLUMNS} FROM current_verdicts ORDER BY change")

    def history(self, case_id: str | None = None) -> list[Entry]:
        """Every change (of one case, if given), oldest first."""
        if case_id is None:
            return self._select(f"SELECT {_COLUMNS} FROM history ORDER BY change")
        return self._select(f"SELECT {_COLUMNS} FROM history WHERE case_id = ? ORDER BY change", (case_id,))

    def contents(self) -> list[Content]:
        """Every table content a verdict was recorded on, oldest first (none in a store made before they were
        remembered, until its next verdict)."""
        with self._lock:
            try:
                if self._db.execute("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = 'contents'"
                                    ).fetchone() is None:
                    return []
                found = self._db.execute("SELECT content, records, name FROM contents ORDER BY at, content")
                return [Content(*row) for row in found.fetchall()]
            except sqlite3.Error as exc:
                raise _store_error(self.path, exc) from None

    def last_change(self) -> str | None:
        """When the latest verdict was recorded (UTC, ISO 8601), or None in an empty store."""
        with self._lock:
            try:
                return self._db.execute("SELECT MAX(at) FROM history").fetchone()[0]
            except sqlite3.Error as exc:
                raise _store_error(self.path, exc) from None

    def get(self, case_id: str) -> Entry | None:
        """A case's latest entry, or None when it has no verdict."""
        found = self._select(f"SELECT {_COLUMNS} FROM history WHERE case_id = ? ORDER BY change DESC LIMIT 1",
                             (case_id,))
        return found[0] if found else None


def _rollback(db: sqlite3.Connection) -> None:
    """Roll back the open transaction, if SQLite has not already done so after the error; a failing rollback
    is not reported over the error that led here (the journal restores the store on the next open)."""
    if db.in_transaction:
        with suppress(sqlite3.Error):
            db.execute("ROLLBACK")


def _full(exc: sqlite3.Error) -> bool:
    # SQLITE_FULL ("database or disk is full"): the disk is full, or the store reached its page limit. The
    # primary code is the low byte of the extended one (SQLite documentation, "Result and Error Codes").
    code = getattr(exc, "sqlite_errorcode", None)
    return (code is not None and code & 0xFF == sqlite3.SQLITE_FULL) or "disk is full" in str(exc)


def _busy(exc: sqlite3.Error) -> bool:
    text = str(exc)
    return "locked" in text or "busy" in text


def _store_error(path: Path, exc: sqlite3.Error) -> InputError:
    reason = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    if _full(exc):
        return InputError(f"review store {path}: the disk (or the store) is full, so nothing was saved; earlier "
                          "verdicts and notes are kept; free some space and try again, or give another store=PATH",
                          parameters=("store",))
    if _busy(exc):
        fix = f"another program held it for over {BUSY_TIMEOUT_MS // 1000} s; try again"
    elif "not a database" in reason or "malformed" in reason:
        fix = "it is not a readable review store; give another store=PATH"
    elif "disk I/O error" in reason:
        fix = "nothing was saved; the disk may be full or failing: check it, or give another store=PATH"
    else:
        fix = "check the folder exists and is writable, or give another store=PATH"
    return InputError(f"review store {path}: {reason}; {fix}", parameters=("store",))

