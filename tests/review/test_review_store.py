"""The review store and record matching: transactions, crash safety, concurrency, history, re-scan matching.

SQLite behaviour checked here is as documented by SQLite: "Write-Ahead Logging" (journal_mode=WAL),
"PRAGMA integrity_check" (returns the single row 'ok' on a sound database), "PRAGMA busy_timeout" and
"Atomic Commit In SQLite" (a committed transaction survives the process being killed). Data is invented.
"""

from __future__ import annotations

import hashlib
import json
import os
import signal
import sqlite3
import subprocess
import sys
import threading
import time
from datetime import datetime, timedelta
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from fixtures.tables import SHAPES, make_frame
from investigator.errors import InputError
from investigator.io.tables import load_table
from investigator.review import VERDICTS, Case, ReviewStore, default_store_path, group_case
from investigator.review import store as store_module
from investigator.review.matching import fingerprint, match_store, record_case, record_values

N = SHAPES["invoices"].n  # records in the invented invoices table
SEED = 5  # this module's draw of them (the matching cases below were written against it)


def write(frame: pd.DataFrame, path: Path) -> Path:
    frame.to_csv(path, index=False)
    return path


def case(i: int) -> Case:
    return Case(case_id=f"key:invoice:K{i}", kind="record", key_column="invoice", key=f"K{i}")


def rows(path: Path) -> list[tuple]:
    """Every history row, read with plain sqlite3 (not through the store)."""
    with sqlite3.connect(path) as db:
        return db.execute("SELECT * FROM history ORDER BY change").fetchall()


# -- the file, the schema, the states ------------------------------------------------------------------------


def test_default_store_path_sits_beside_the_data(tmp_path):
    assert default_store_path(tmp_path / "claims.csv") == tmp_path / "claims.csv.investigation.sqlite"
    # Two files of one name but different formats do not share a store.
    assert default_store_path("a.csv") != default_store_path("a.xlsx")


def test_store_is_in_wal_mode_with_a_busy_timeout(tmp_path):
    path = tmp_path / "s.sqlite"
    with ReviewStore(path) as store:
        store.set(case(1), "benign")
        # SQLite documentation, PRAGMA journal_mode / busy_timeout: both read back the value in force.
        assert store._db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert store._db.execute("PRAGMA busy_timeout").fetchone()[0] == store_module.BUSY_TIMEOUT_MS
    with sqlite3.connect(path) as db:  # WAL is persistent: a fresh connection sees it too
        assert db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"


def test_every_state_is_accepted_and_others_are_refused(tmp_path):
    path = tmp_path / "s.sqlite"
    with ReviewStore(path) as store:
        for i, state in enumerate(VERDICTS):
            assert store.set(case(i), state.upper()).verdict == state
        before = rows(path)
        with pytest.raises(InputError) as err:
            store.set(case(99), "fraud")
    message = str(err.value)
    assert "\n" not in message and "fraud" in message
    for state in VERDICTS:
        assert state in message
    assert rows(path) == before


def test_history_is_append_only_and_the_current_view_shows_the_latest(tmp_path):
    path = tmp_path / "s.sqlite"
    with ReviewStore(path, reviewer="ana") as store:
        first = store.set(case(1), "follow-up", "ask the supplier")
        second = store.set(case(1), "confirmed", "duplicate of INV-004", reviewer="ben")
        store.set(case(2), "benign")
        history = store.history(case(1).case_id)
        current = {e.case_id: e for e in store.current()}
    assert [(e.verdict, e.note, e.reviewer) for e in history] == [
        ("follow-up", "ask the supplier", "ana"), ("confirmed", "duplicate of INV-004", "ben")]
    assert current[case(1).case_id].change == second.change > first.change
    assert current[case(1).case_id].verdict == "confirmed"
    assert len(current) == 2
    with sqlite3.connect(path) as db:
        view = db.execute("SELECT verdict FROM current_verdicts WHERE case_id = ?", (case(1).case_id,))
        assert view.fetchall() == [("confirmed",)]
        for sql in ("UPDATE history SET verdict = 'benign'", "DELETE FROM history"):
            with pytest.raises(sqlite3.DatabaseError, match="append-only"):
                db.execute(sql)
    assert len(rows(path)) == 3


def test_a_new_verdict_keeps_the_note_unless_a_note_is_given(tmp_path):
    with ReviewStore(tmp_path / "s.sqlite") as store:
        store.set(case(1), "follow-up", "call the buyer on Monday")
        assert store.set(case(1), "confirmed").note == "call the buyer on Monday"
        assert store.get(case(1).case_id).note == "call the buyer on Monday"
        assert store.set(case(1), "confirmed", "").note == ""
        assert [e.note for e in store.history()] == ["call the buyer on Monday"] * 2 + [""]


def test_entries_carry_reviewer_utc_time_run_and_record(tmp_path, monkeypatch):
    frame_path = write(make_frame("invoices", seed=SEED), tmp_path / "inv.csv")
    table = load_table(frame_path, id_column="invoice")
    monkeypatch.setattr(store_module.getpass, "getuser", lambda: "carla")
    with ReviewStore(tmp_path / "s.sqlite") as store:
        entry = store.set(record_case(table, 3), "benign", run_id="run-7", data_sha256=table.source.sha256)
        stored = store.get(entry.case_id)
    assert stored == entry
    assert stored.reviewer == "carla" and stored.run_id == "run-7"
    assert stored.data_sha256 == hashlib.sha256(frame_path.read_bytes()).hexdigest()
    at = datetime.fromisoformat(stored.at)
    assert at.utcoffset() == timedelta(0)
    assert abs((datetime.now(at.tzinfo) - at).total_seconds()) < 60
    assert stored.values == record_values(table, 3)
    assert stored.values["invoice"] == "INV-003" and stored.row == 4


def test_reviewer_falls_back_when_the_os_names_nobody(monkeypatch):
    def nobody():
        raise OSError("no username set in the environment")

    monkeypatch.setattr(store_module.getpass, "getuser", nobody)
    assert store_module.default_reviewer() == "unknown"


def test_group_cases_fit_the_same_store(tmp_path):
    path = write(make_frame("invoices", seed=SEED), tmp_path / "inv.csv")
    table = load_table(path, id_column="invoice")
    with ReviewStore(tmp_path / "s.sqlite") as store:
        store.set(group_case("group:3", members=["INV-001", "INV-002"]), "follow-up", "same evening")
        store.set(record_case(table, 0), "benign")
        matching = match_store(table, store)
    assert [(g.case_id, g.verdict, g.values) for g in matching.groups] == [
        ("group:3", "follow-up", {"members": ["INV-001", "INV-002"]})]
    assert matching.verdicts()[0] == "benign" and matching.disappeared == []
    with pytest.raises(InputError):
        group_case("3")


def test_a_file_that_is_not_our_store_is_refused_and_left_alone(tmp_path):
    other = tmp_path / "other.sqlite"
    with sqlite3.connect(other) as db:
        db.execute("CREATE TABLE budget (line TEXT, amount REAL)")
        db.execute("INSERT INTO budget VALUES ('travel', 1200.0)")
    text = tmp_path / "notes.txt"
    text.write_bytes(b"not a database at all, just some words that go on for a while" * 20)
    before = {p: p.read_bytes() for p in (other, text)}
    for path in (other, text):
        with pytest.raises(InputError) as err:
            ReviewStore(path)
        assert "\n" not in str(err.value) and str(path) in str(err.value)
    assert {p: p.read_bytes() for p in (other, text)} == before


# -- crash safety and concurrency ----------------------------------------------------------------------------

WRITER = """
import pathlib, sys, time
from investigator.review.store import Case, ReviewStore
store = ReviewStore(sys.argv[1], reviewer=sys.argv[2])
go = pathlib.Path(sys.argv[4]) if len(sys.argv) > 4 else None
if go is not None:  # say the store is open, then wait for the signal so that both start together
    pathlib.Path(f"{go}.{sys.argv[2]}").touch()
    deadline = time.monotonic() + 30
    while not go.exists() and time.monotonic() < deadline:
        time.sleep(0.005)
for i in range(int(sys.argv[3])):
    cid = f"key:invoice:{sys.argv[2]}-{i}"
    store.set(Case(case_id=cid, kind="record", key_column="invoice", key=f"{sys.argv[2]}-{i}"),
              "confirmed", "note " * (i % 7))
    print(cid, flush=True)
"""


def test_a_killed_writer_leaves_a_sound_store_with_every_returned_write(tmp_path):
    path = tmp_path / "s.sqlite"
    printed: list[str] = []
    for round_, kill_after in enumerate((15, 60, 140)):  # three kills at different points of a stream
        child = subprocess.Popen([sys.executable, "-c", WRITER, str(path), f"r{round_}", "100000"],
                                 stdout=subprocess.PIPE, text=True)
        got = 0
        deadline = time.monotonic() + 60
        while got < kill_after and time.monotonic() < deadline:
            line = child.stdout.readline()
            if not line:
                break
            printed.append(line.strip())
            got += 1
        os.kill(child.pid, signal.SIGKILL)  # while it is in the middle of further writes
        # Lines flushed before the kill (those writes had returned too). Read through the same buffered
        # stream: communicate() with a timeout reads the raw pipe and would skip what readline() buffered.
        printed += child.stdout.read().split()
        child.stdout.close()
        child.wait(timeout=30)
        assert child.returncode == -signal.SIGKILL
        assert got == kill_after, "the writer stopped before it was killed"
    with sqlite3.connect(path) as db:
        # SQLite documentation, PRAGMA integrity_check: a sound database returns one row, 'ok'.
        assert db.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
        stored = {r[0] for r in db.execute("SELECT case_id FROM history")}
    missing = [c for c in printed if c not in stored]
    assert not missing, f"{len(missing)} returned writes lost, e.g. {missing[:3]}"
    assert len(printed) >= 15 + 60 + 140


def test_two_processes_writing_at_once_lose_nothing(tmp_path):
    path, go = tmp_path / "fresh.sqlite", tmp_path / "go"  # both also race to create the store
    n = 150
    children = [subprocess.Popen([sys.executable, "-c", WRITER, str(path), name, str(n), str(go)],
                                 stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
                for name in ("tui", "cli")]
    deadline = time.monotonic() + 60
    while not all(Path(f"{go}.{name}").exists() for name in ("tui", "cli")) and time.monotonic() < deadline:
        time.sleep(0.01)
    assert all(c.poll() is None for c in children), "a writer ended before the two could start together"
    go.touch()
    outputs = [c.communicate(timeout=120) for c in children]
    for child, (_, err) in zip(children, outputs, strict=True):
        assert child.returncode == 0, err
    with sqlite3.connect(path) as db:
        assert db.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
        counts = dict(db.execute("SELECT reviewer, COUNT(*) FROM history GROUP BY reviewer").fetchall())
        assert db.execute("SELECT COUNT(DISTINCT change) FROM history").fetchone()[0] == 2 * n
    assert counts == {"tui": n, "cli": n}


def test_a_writer_waits_for_a_held_lock_instead_of_failing(tmp_path):
    path = tmp_path / "s.sqlite"
    store = ReviewStore(path)
    other = sqlite3.connect(path, isolation_level=None)
    other.execute("BEGIN IMMEDIATE")  # another program holds the write lock
    outcome: list = []
    writer = threading.Thread(target=lambda: outcome.append(store.set(case(1), "benign")))
    writer.start()
    time.sleep(0.3)
    assert writer.is_alive() and outcome == [], "the write should be waiting for the lock"
    other.execute("COMMIT")
    writer.join(timeout=10)
    assert len(outcome) == 1 and store.get(case(1).case_id).verdict == "benign"
    other.close()
    store.close()


# -- fingerprints --------------------------------------------------------------------------------------------


def test_fingerprint_is_sha256_of_the_documented_normal_form():
    values = {"supplier": "east", "amount": 12.5, "lines": 3, "memo": None}
    # Normal form (docs/review.md): [name, canonical text] pairs, names sorted, as compact JSON, UTF-8.
    normal = '[["amount","12.5"],["lines","3"],["memo",""],["supplier","east"]]'
    assert fingerprint(values) == hashlib.sha256(normal.encode("utf-8")).hexdigest()


def test_fingerprint_ignores_column_order_and_representation_but_not_values():
    base = {"a": 1, "b": 0.1, "c": "x", "d": float("nan")}
    assert fingerprint(base) == fingerprint({"d": None, "c": "x", "b": 0.1, "a": 1.0})
    assert fingerprint(base) == fingerprint({**base, "a": np.int64(1), "b": np.float64(0.1)})
    for changed in ({"a": 2}, {"b": 0.1 + 1e-12}, {"c": "X"}, {"d": 0.0}, {"e": None}):
        assert fingerprint({**base, **changed}) != fingerprint(base), changed


def test_a_gap_in_an_appended_row_does_not_change_other_fingerprints(tmp_path):
    frame = make_frame("invoices", seed=SEED)
    before = load_table(write(frame, tmp_path / "a.csv"))
    gap = pd.DataFrame({"invoice": ["INV-900"], "amount": [10.0], "lines": [None], "supplier": ["east"]})
    after = load_table(write(pd.concat([frame, gap]), tmp_path / "b.csv"))
    assert after.frame["lines"].dtype.kind == "f"  # pandas read the integer column as floats now
    assert [fingerprint(record_values(before, i)) for i in range(N)] == \
        [fingerprint(record_values(after, i)) for i in range(N)]


# -- re-scan matching ----------------------------------------------------------------------------------------


def rescan(frame: pd.DataFrame, seed: int = 9) -> tuple[pd.DataFrame, dict]:
    """Shuffle the rows, append three, change one amount and delete one record; say which."""
    changed, deleted = "INV-004", "INV-007"
    new = frame.copy()
    new.loc[new["invoice"] == changed, "amount"] = new.loc[new["invoice"] == changed, "amount"] * 10
    new = new[new["invoice"] != deleted]
    extra = make_frame("invoices", 3, seed=77).assign(invoice=["INV-100", "INV-101", "INV-102"])
    new = pd.concat([new, extra]).sample(frac=1, random_state=seed).reset_index(drop=True)
    return new, {"changed": changed, "deleted": deleted}


REVIEWED = {"INV-001": "confirmed", "INV-004": "follow-up", "INV-007": "benign", "INV-010": "benign"}


@pytest.mark.parametrize("keyed", [True, False], ids=["by key", "by fingerprint"])
def test_verdicts_follow_their_records_after_a_rescan(tmp_path, keyed):
    frame = make_frame("invoices", seed=SEED)
    id_column = "invoice" if keyed else None
    first = load_table(write(frame, tmp_path / "inv.csv"), id_column=id_column)
    store = ReviewStore(tmp_path / "s.sqlite")
    for i, key in enumerate(first.frame["invoice"]):
        if key in REVIEWED:
            store.set(record_case(first, i), REVIEWED[key], f"note on {key}")
    new, what = rescan(frame)
    second = load_table(write(new, tmp_path / "inv.csv"), id_column=id_column)
    matching = match_store(second, store)
    store.close()

    found = {second.frame["invoice"][i]: m for i, m in matching.matches.items()}
    assert set(matching.verdicts()) - {None} <= set(REVIEWED.values())
    for key in ("INV-001", "INV-010"):  # unchanged records: same verdict, new row
        assert found[key].entry.verdict == REVIEWED[key] and found[key].entry.note == f"note on {key}"
        assert not found[key].changed
        assert found[key].row == int(np.flatnonzero(new["invoice"] == key)[0]) + 1
    for key in ("INV-100", "INV-101", "INV-102"):  # appended records have no verdict
        assert key not in found
    gone = {d.entry.values["invoice"]: d for d in matching.disappeared}
    assert what["deleted"] in gone and gone[what["deleted"]].entry.verdict == "benign"
    old_amount = float(frame.loc[frame["invoice"] == what["changed"], "amount"].iloc[0])
    if keyed:
        m = found[what["changed"]]
        assert m.changed and m.entry.verdict == "follow-up"
        assert m.previous["amount"] == old_amount and m.current["amount"] == pytest.approx(old_amount * 10)
        assert [c for c, _, _ in m.differences()] == ["amount"]
        assert sorted(gone) == [what["deleted"]]
        assert sum(m.changed for m in matching.matches.values()) == 1
    else:
        # Without a key a changed record cannot be told from a removed one: listed, with the near match.
        assert what["changed"] not in found
        d = gone[what["changed"]]
        assert d.entry.verdict == "follow-up" and d.near_column == "amount"
        assert new["invoice"][d.near_row - 1] == what["changed"]
        assert sorted(gone) == sorted(what.values())


def test_identical_records_without_a_key_share_one_verdict(tmp_path):
    frame = make_frame("invoices", 8, seed=SEED).drop(columns="invoice")
    frame = pd.concat([frame, frame.iloc[[2, 2]]]).reset_index(drop=True)  # rows 3, 9 and 10 are identical
    table = load_table(write(frame, tmp_path / "inv.csv"))
    with ReviewStore(tmp_path / "s.sqlite") as store:
        store.set(record_case(table, 8), "benign", "repeated upload")
        matching = match_store(table, store)
    assert sorted(m.row for m in matching.matches.values()) == [3, 9, 10]
    assert {m.copies for m in matching.matches.values()} == {3}
    assert matching.verdicts().count("benign") == 3


def test_the_latest_of_two_matching_verdicts_is_in_force_and_the_other_listed(tmp_path):
    path = write(make_frame("invoices", seed=SEED), tmp_path / "inv.csv")
    by_row, by_key = load_table(path), load_table(path, id_column="invoice")
    with ReviewStore(tmp_path / "s.sqlite") as store:
        store.set(record_case(by_row, 5), "follow-up")  # first without --id, by content
        store.set(record_case(by_key, 5), "confirmed")  # then with --id, by key
        keyed, unkeyed = match_store(by_key, store), match_store(by_row, store)
    for matching in (keyed, unkeyed):
        m = matching.matches[5]
        assert m.entry.verdict == "confirmed" and [e.verdict for e in m.earlier] == ["follow-up"]
        assert matching.disappeared == [] and len(matching.matches) == 1


def test_a_verdict_recorded_with_a_key_says_how_to_match_it_when_listed_without(tmp_path):
    frame = make_frame("invoices", seed=SEED)
    keyed = load_table(write(frame, tmp_path / "inv.csv"), id_column="invoice")
    with ReviewStore(tmp_path / "s.sqlite") as store:
        store.set(record_case(keyed, 4), "confirmed")
        frame.loc[4, "amount"] += 1
        matching = match_store(load_table(write(frame, tmp_path / "inv.csv")), store)
    assert len(matching.disappeared) == 1 and "--id invoice" in matching.disappeared[0].reason
    assert json.dumps(matching.disappeared[0].entry.values)  # the old version is kept, JSON-clean
