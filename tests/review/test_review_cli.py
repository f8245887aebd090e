"""The `verdict` and `verdicts` commands: recording, listing, exporting, re-scans and bad input.

Data is invented; every table is a dozen rows. Most runs call `main()` in the process (fast); the ones that
check what a user sees in a terminal, or two programs at once, run `python -m investigator`.
"""

from __future__ import annotations

import csv
import json
import sqlite3
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from fixtures.cli import assert_one_line_error, run
from fixtures.tables import SHAPES, make_frame
from investigator.review import VERDICTS, default_store_path

N = SHAPES["invoices"].n  # records in the invented invoices table


@pytest.fixture
def data(tmp_path) -> Path:
    path = tmp_path / "invoices.csv"
    make_frame("invoices").to_csv(path, index=False)
    return path


def history(store: Path) -> list[tuple]:
    with sqlite3.connect(store) as db:
        return db.execute("SELECT * FROM history ORDER BY change").fetchall()


# -- recording and listing -----------------------------------------------------------------------------------


def test_help_lists_both_commands():
    done = run("--help")
    assert done.returncode == 0 and "verdict" in done.stdout and "verdicts" in done.stdout
    done = run("verdict", "--help")
    assert done.returncode == 0
    for word in ("--row", "--key", "--set", "--note", "--store", "--reviewer", "--id", *VERDICTS):
        assert word in done.stdout


def test_a_verdict_by_key_is_stored_beside_the_data_and_listed(cli, data):
    code, out, err = cli("verdict", data, "--id", "invoice", "--key", "INV-005", "--set", "confirmed",
                     "--note", "billed twice", "--reviewer", "dana")
    assert (code, err) == (0, "")
    assert "INV-005" in out and "confirmed" in out
    store = default_store_path(data)
    [row] = history(store)
    assert row[1:8] == ("key:invoice:INV-005", "record", "invoice", "INV-005", 6, "confirmed", "billed twice")
    assert row[8] == "dana"
    code, out, err = cli("verdicts", data, "--id", "invoice")
    assert (code, err) == (0, "")
    assert "row 6 (invoice INV-005): confirmed by dana" in out and "billed twice" in out
    assert "History" in out and "#1" in out


def test_setting_twice_keeps_both_in_history_and_the_note(cli, data):
    store = default_store_path(data)
    cli("verdict", data, "--row", 3, "--set", "follow-up", "--note", "ask the buyer")
    code, out, _ = cli("verdict", data, "--row", 3, "--set", "benign")
    assert code == 0 and "was follow-up" in out
    rows = history(store)
    assert [(r[6], r[7]) for r in rows] == [("follow-up", "ask the buyer"), ("benign", "ask the buyer")]
    code, out, _ = cli("verdicts", data)
    listed = out.split("History")[0]
    assert "row 3: benign" in listed and "follow-up" not in listed
    assert "-> follow-up" in out.split("History")[1]


def test_without_a_key_identical_records_share_the_verdict(cli, tmp_path):
    frame = make_frame("invoices", 8).drop(columns="invoice")
    frame = pd.concat([frame, frame.iloc[[4]]]).reset_index(drop=True)  # row 9 repeats row 5
    path = tmp_path / "dup.csv"
    frame.to_csv(path, index=False)
    code, out, _ = cli("verdict", path, "--row", 9, "--set", "benign")
    assert code == 0 and "all 2 identical records (rows 5, 9)" in out
    code, out, _ = cli("verdicts", path)
    assert "row 5: benign" in out and "row 9: benign" in out and "applies to all 2 identical" in out


def test_without_an_id_column_the_key_is_the_row(cli, data):
    code, out, _ = cli("verdict", data, "--key", 4, "--set", "benign")
    assert code == 0 and out.startswith("row 4: benign")
    [row] = history(default_store_path(data))
    assert row[1].startswith("fp:") and row[5] == 4 and json.loads(row[12])["invoice"] == "INV-003"


def test_listing_without_a_store_creates_nothing(cli, data):
    code, out, err = cli("verdicts", data)
    assert (code, err) == (0, "") and "No verdicts yet" in out
    assert not default_store_path(data).exists()


# -- re-scans ------------------------------------------------------------------------------------------------


def test_verdicts_follow_their_records_through_a_rescan(cli, data, tmp_path):
    for key, state in (("INV-002", "benign"), ("INV-006", "follow-up"), ("INV-009", "confirmed")):
        assert cli("verdict", data, "--id", "invoice", "--key", key, "--set", state)[0] == 0
    frame = pd.read_csv(data)
    frame.loc[frame["invoice"] == "INV-006", "lines"] += 5                # changed
    frame = frame[frame["invoice"] != "INV-009"]                        # deleted
    frame = pd.concat([frame, make_frame("invoices", 2, seed=8).assign(invoice=["INV-500", "INV-501"])])  # appended
    frame = frame.sample(frac=1, random_state=4).reset_index(drop=True)  # shuffled
    frame.to_csv(data, index=False)
    out_file = tmp_path / "verdicts.json"
    code, out, err = cli("verdicts", data, "--id", "invoice", "--export", out_file)
    assert (code, err) == (0, "")
    exported = json.loads(out_file.read_text(encoding="utf-8"))
    by_key = {v["key"]: v for v in exported["verdicts"]}
    row_of = {k: i + 1 for i, k in enumerate(frame["invoice"])}
    assert by_key["INV-002"]["status"] == "in force" and by_key["INV-002"]["rows"] == [row_of["INV-002"]]
    changed = by_key["INV-006"]
    assert changed["status"] == "changed" and changed["rows"] == [row_of["INV-006"]]
    assert [c["column"] for c in changed["changes"]] == ["lines"]
    assert changed["changes"][0]["now"] == changed["changes"][0]["then"] + 5
    assert changed["values"]["lines"] + 5 == changed["values_now"]["lines"]
    assert by_key["INV-009"]["status"] == "disappeared" and by_key["INV-009"]["verdict"] == "confirmed"
    assert len(exported["history"]) == 3
    assert "CHANGED since the verdict: lines" in out
    assert "not in the data (kept, never dropped)" in out and "INV-009" in out


# -- export --------------------------------------------------------------------------------------------------

HOSTILE = ["=SUM(A1:A9)", "+41 20 000", "-3 credit", "@cmd", "\tTAB", "\rCR", "ordinary note"]


def test_csv_export_neutralises_formula_like_cells(cli, data, tmp_path):
    for row, note in enumerate(HOSTILE, 1):
        assert cli("verdict", data, "--row", row, "--set", "benign", "--note", note)[0] == 0
    out_file = tmp_path / "verdicts.csv"
    code, _, err = cli("verdicts", data, "--export", out_file)
    assert (code, err) == (0, "")
    with out_file.open(newline="", encoding="utf-8") as f:
        table = list(csv.DictReader(f))
    notes = [r["note"] for r in table]
    # OWASP, "CSV Injection": cells starting with = + - @ tab or CR get a leading apostrophe.
    assert notes == ["'" + n for n in HOSTILE[:-1]] + ["ordinary note"]
    assert [r["change"] for r in table] == [str(i) for i in range(1, len(HOSTILE) + 1)]
    assert all(r["latest"] == "True" and r["status"] == "in force" for r in table)


def test_export_to_an_unknown_format_is_refused(cli, data, tmp_path):
    code, _, err = cli("verdicts", data, "--export", tmp_path / "v.txt")
    assert code == 2
    assert_one_line_error(err, "v.txt", ".csv", ".json")
    assert not (tmp_path / "v.txt").exists()


# -- bad input -----------------------------------------------------------------------------------------------

BAD = {
    "unknown state": (["--row", 2, "--set", "fraud"], ["fraud", *VERDICTS]),
    "row out of range": (["--row", 99, "--set", "benign"], ["--row 99", f"1 to {N}", "invoices.csv"]),
    "row zero": (["--row", 0, "--set", "benign"], ["--row 0"]),
    "unknown key": (["--id", "invoice", "--key", "INV-999", "--set", "benign"], ["INV-999", "invoice"]),
    "both row and key": (["--row", 1, "--key", "INV-001", "--set", "benign"], ["--key", "--row"]),
    "neither row nor key": (["--set", "benign"], ["--row", "--key"]),
    "no state": (["--row", 1], ["--set"]),
    "unknown id column": (["--id", "ref", "--key", "x", "--set", "benign"], ["ref", "invoice"]),
    "empty reviewer": (["--row", 1, "--set", "benign", "--reviewer", " "], ["--reviewer"]),
    "unwritable store": (["--row", 1, "--set", "benign", "--store", "{tmp}/plain-file/s.sqlite"],
                         ["plain-file"]),
    "store is a folder": (["--row", 1, "--set", "benign", "--store", "{tmp}"], ["folder"]),
}


@pytest.mark.parametrize("case", list(BAD), ids=list(BAD))
def test_bad_input_exits_2_with_one_line_and_leaves_the_store_alone(cli, data, tmp_path, case):
    store = default_store_path(data)
    assert cli("verdict", data, "--row", 4, "--set", "follow-up", "--note", "keep me")[0] == 0
    (tmp_path / "plain-file").write_text("not a folder", encoding="utf-8")
    before = history(store)
    args, words = BAD[case]
    args = [str(a).replace("{tmp}", str(tmp_path)) for a in args]
    code, out, err = cli("verdict", data, *args)
    assert code == 2 and out == ""
    assert_one_line_error(err, *words)
    assert history(store) == before
    assert not (tmp_path / "plain-file" / "s.sqlite").exists()


def test_a_store_that_is_not_a_database_is_refused_and_kept(cli, data, tmp_path):
    other = tmp_path / "ledger.sqlite"
    other.write_bytes(b"these are someone's notes, not a database" * 10)
    before = other.read_bytes()
    for command in (["verdict", data, "--row", 1, "--set", "benign"], ["verdicts", data]):
        code, _, err = cli(*command, "--store", other)
        assert code == 2
        assert_one_line_error(err, str(other))
    assert other.read_bytes() == before


def test_the_data_file_is_never_taken_for_the_store(cli, data):
    before = data.read_bytes()
    code, _, err = cli("verdict", data, "--row", 1, "--set", "benign", "--store", data)
    assert code == 2
    assert_one_line_error(err, "data file")
    assert data.read_bytes() == before


def test_bad_input_in_a_terminal_shows_no_traceback(data):
    done = run("verdict", data, "--row", 50, "--set", "benign")
    assert done.returncode == 2 and done.stdout == ""
    assert_one_line_error(done.stderr, "--row 50")
    assert not default_store_path(data).exists()


# -- two programs at once ------------------------------------------------------------------------------------

# The second program stands in for the TUI: it records verdicts through the API without pause until told to
# stop. The two sides synchronise on files and lines, never on time: the writer says "ready" once it has
# written, and "after N" once it has written again after seeing the file mark-N, which the test creates only
# when the CLI's N-th verdict is committed. So its writes are known to come before, between and after the
# CLI's, whichever side the scheduler favours.
API_WRITER = """
import os, sys, pathlib
from investigator.review.store import Case, ReviewStore
store, signals = ReviewStore(sys.argv[1], reviewer="tui"), pathlib.Path(sys.argv[2])
parent, n, told = os.getppid(), 0, set()
while not (signals / "stop").exists() and os.getppid() == parent:  # also stop if the test process is gone
    marks = {m.name for m in signals.glob("mark-*")} - told  # seen before this write, so it comes after them
    store.set(Case(case_id=f"group:{n}", kind="group"), "follow-up", f"group note {n}")
    n += 1
    if n == 1:
        print("ready", flush=True)
    for mark in sorted(marks):
        print("after", mark.removeprefix("mark-"), flush=True)
    told |= marks
print(n, flush=True)
"""


@pytest.mark.slow
def test_the_tui_and_the_cli_writing_at_once_lose_nothing(data, tmp_path):
    store, signals = default_store_path(data), tmp_path / "signals"
    signals.mkdir()
    tui = subprocess.Popen([sys.executable, "-c", API_WRITER, str(store), str(signals)],
                           stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        assert tui.stdout.readline() == "ready\n", "the TUI writer did not start"  # it has written once
        for n, row in enumerate((2, 7), 1):
            done = run("verdict", data, "--row", row, "--set", "confirmed", "--reviewer", "cli")
            assert done.returncode == 0, done.stderr
            (signals / f"mark-{n}").touch()
            assert tui.stdout.readline() == f"after {n}\n", "the TUI writer stopped while the CLI wrote"
    finally:
        (signals / "stop").touch()
        out, err = tui.communicate(timeout=60)
    assert tui.returncode == 0, err
    written = int(out)
    rows = history(store)
    assert sum(r[8] == "tui" for r in rows) == written > 0
    assert sorted(r[5] for r in rows if r[8] == "cli") == [2, 7]
    # The order of the history: TUI writes before, between and after the two CLI verdicts.
    order = "".join("c" if r[8] == "cli" else "t" for r in rows)
    assert order.startswith("t") and order.endswith("t") and order.count("c") == 2
    assert "cc" not in order, order
    with sqlite3.connect(store) as db:
        assert db.execute("PRAGMA integrity_check").fetchall() == [("ok",)]  # SQLite docs: 'ok' when sound
