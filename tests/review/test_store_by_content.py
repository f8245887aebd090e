"""Verdicts follow the data, not the file name: the content key, the store of the same records found under
another name, fingerprints that are the same whether a date is a cell or ISO text, verdicts on several
records in one transaction, and what happens when the records change (nothing is lost or altered).

The data is invented: sample records of a fictional soil laboratory, written once as CSV (dates as ISO text)
and once as .xlsx with openpyxl (dates as real date cells, as a spreadsheet program saves them).
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import sqlite3
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest

from fixtures.cli import assert_one_line_error
from fixtures.messy import purchase_lines, zero_inflated
from fixtures.tables import make_frame
from investigator.errors import InputError
from investigator.io.tables import load_table
from investigator.review import store as store_module
from investigator.review.matching import (
    canonical,
    column_texts,
    content_key,
    fingerprint,
    iso_text,
    json_value,
    match_store,
    record_case,
    record_values,
)
from investigator.review.store import Case, ReviewStore, default_store_path
from investigator.review.stores import find_store
from investigator.review.verdicts import record_verdict, record_verdicts

COLUMNS = ["sample", "taken_on", "logged_at", "moisture_pct", "depth_cm", "site", "note"]


def samples(n: int = 30) -> list[list]:
    """Invented soil samples: a key, a date, a date-time, a decimal, an integer, a category and a note with a
    gap."""
    rows = []
    for i in range(n):
        rows.append([f"S-{100 + i}", dt.datetime(2025, 3, 1 + i % 28), dt.datetime(2025, 3, 1 + i % 28, 8 + i % 9, 15),
                     round(11.5 + 0.37 * i, 2), 10 * (1 + i % 4), ["north field", "creek bed", "orchard"][i % 3],
                     None if i % 5 == 0 else f"bag {i}"])
    return rows


def write_csv(path: Path, rows: list[list]) -> Path:
    pd.DataFrame(rows, columns=COLUMNS).to_csv(path, index=False)  # dates as ISO text
    return path


def write_xlsx(path: Path, rows: list[list]) -> Path:
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append(COLUMNS)
    for row in rows:
        sheet.append(row)  # datetimes become date cells
    book.save(path)
    return path


@pytest.fixture
def pair(tmp_path):
    rows = samples()
    return write_csv(tmp_path / "samples.csv", rows), write_xlsx(tmp_path / "samples.xlsx", rows)


def history(path: Path) -> list[tuple]:
    with sqlite3.connect(path) as db:
        return db.execute("SELECT * FROM history ORDER BY change").fetchall()


# -- one normal form for every format ------------------------------------------------------------------------


def test_the_xlsx_holds_date_cells_and_the_csv_iso_text(pair):
    csv, xlsx = (load_table(p) for p in pair)
    assert csv.frame["taken_on"].tolist()[0] == "2025-03-01"  # read as text
    assert str(xlsx.frame["taken_on"].dtype).startswith("datetime64")  # read as dates
    assert record_values(csv, 1)["logged_at"] == "2025-03-02 09:15:00"
    assert record_values(xlsx, 1)["logged_at"] == "2025-03-02T09:15:00"


def test_the_same_records_have_the_same_fingerprints_and_content_key(pair):
    csv, xlsx = (load_table(p) for p in pair)
    assert [fingerprint(record_values(csv, i)) for i in range(csv.n_rows)] == \
        [fingerprint(record_values(xlsx, i)) for i in range(xlsx.n_rows)]
    assert content_key(csv).key == content_key(xlsx).key
    assert content_key(load_table(pair[0], id_column="sample")).key == content_key(csv).key  # --id does not matter


@pytest.mark.parametrize("text, normal", [
    ("2025-03-01", "2025-03-01"), ("2025-03-01T00:00:00", "2025-03-01"), ("2025-03-01 00:00", "2025-03-01"),
    ("2025-03-01 14:30", "2025-03-01T14:30:00"), ("2025-03-01T14:30:05.250000", "2025-03-01T14:30:05.25"),
    ("2025-03-01T00:00:00.000", "2025-03-01"), ("2025-03-01T14:30:00+01:00", "2025-03-01T14:30:00+01:00"),
    ("01/03/2025", "01/03/2025"), ("2025-3-1", "2025-3-1"), ("S-2025-03-01", "S-2025-03-01"),
])
def test_iso_dates_have_one_form_and_other_text_is_kept(text, normal):
    assert iso_text(text) == normal


def test_column_texts_are_the_texts_of_each_cell():
    # The per-column path must give exactly canonical(json_value(cell)) for every cell, or fingerprints would
    # depend on which path computed them: hostile floats, mixed objects, every dtype pandas reads.
    frame = pd.DataFrame({
        "f": [0.1, 1.0, 1e20, np.nan, -0.0, 2.0**53, np.inf, -np.inf, 5e-324, 3.5],
        "i": np.arange(10) * 10**17,
        "b": [True, False] * 5,
        "o": [1, 1.0, True, "x", None, np.nan, "2025-01-01 00:00", b"ab", dt.date(2025, 1, 2),
              dt.datetime(2025, 1, 2, 3, 4)],
        "s": pd.array(["a", None, "2025-01-01T00:00:00", "b"] * 2 + ["a", "c"], dtype="str"),
        "d": pd.to_datetime(["2025-01-01", None, "2025-02-03 04:05:06.5", "2025-01-01"] * 2 + ["2025-01-01"] * 2,
                            format="ISO8601"),
        "z": pd.to_datetime(["2025-01-01"] * 10).tz_localize("UTC"),
        "F": pd.array([1.5, None, 2.0] * 3 + [1.0], dtype="Float64"),
        "I": pd.array([1, None] * 5, dtype="Int64"),
        "c": pd.Categorical(["x", "y"] * 5),
        "h": np.float32([0.1] * 10),
    })
    messy = [purchase_lines(n=200)[0], zero_inflated(n=200)[0], make_frame("invoices")]
    for table in [frame, *messy]:
        for column in table:
            assert column_texts(table[column]) == [canonical(json_value(v)) for v in table[column].tolist()], column


def test_the_content_key_ignores_order_and_sees_every_change(pair):
    table = load_table(pair[0])
    key = content_key(table).key
    frame = table.frame
    shuffled = frame.sample(frac=1, random_state=3)[list(frame.columns[::-1])]
    assert content_key(load_table(shuffled)).key == key  # rows and columns in another order
    as_floats = frame.assign(depth_cm=frame["depth_cm"].astype(float))  # 10 and 10.0 are one value
    assert content_key(load_table(as_floats)).key == key
    changed = frame.copy()
    changed.loc[7, "moisture_pct"] += 0.01
    assert content_key(load_table(changed)).key != key
    assert content_key(load_table(frame.iloc[:-1])).key != key  # a removed record
    assert content_key(load_table(frame.rename(columns={"note": "remark"}))).key != key
    assert content_key(table).records == 30 and content_key(table).name == "samples.csv"


# -- which store ---------------------------------------------------------------------------------------------


def test_a_verdict_on_the_csv_is_seen_from_the_xlsx_and_one_set_there_goes_to_the_same_store(cli, pair):
    csv, xlsx = pair
    code, out, err = cli("verdict", csv, "--id", "sample", "--key", "S-104", "--set", "confirmed", "--note", "wet bag")
    assert code == 0, err
    code, out, err = cli("verdicts", xlsx, "--id", "sample")
    assert code == 0, err
    assert "matched by content" in out and "row 5 (sample S-104): confirmed" in out and "wet bag" in out
    code, out, err = cli("verdict", xlsx, "--id", "sample", "--key", "S-107", "--set", "benign")
    assert code == 0, err
    assert f"Saved in {default_store_path(csv)} (the store of the same records" in out
    assert not default_store_path(xlsx).exists()  # no store of its own name
    assert [h[6] for h in history(default_store_path(csv))] == ["confirmed", "benign"]  # the verdict column
    # Without a key, the records are known by content: the same fingerprints from both files.
    code, out, err = cli("verdict", csv, "--row", "12", "--set", "follow-up")
    assert code == 0, err
    code, out, err = cli("verdicts", xlsx)
    assert code == 0, err
    assert "row 12: follow-up" in out and "row 5: confirmed" in out and "Verdicts whose record is not" not in out


def test_a_scan_and_a_report_of_the_xlsx_read_the_csv_store(cli, pair, tmp_path):
    import investigator

    csv, xlsx = pair
    record_verdict(load_table(csv, id_column="sample"), 4, "confirmed", "wet bag", default_store_path(csv))
    result = investigator.scan(xlsx, id="sample")
    assert result.verdicts[4] == "confirmed" and result.notes[4] == "wet bag"
    assert result.run.review_store == str(default_store_path(csv))
    assert any("matched by content" in n for n in result.run.notices)
    code, out, err = cli("report", xlsx, "--id", "sample", "--out", tmp_path / "cases.csv")
    assert code == 0, err
    cases = pd.read_csv(tmp_path / "cases.csv")
    assert cases.loc[cases["key"] == "S-104", "verdict"].tolist() == ["confirmed"]


def test_the_store_by_name_wins_and_the_latest_of_several_by_content(pair, tmp_path):
    csv, xlsx = pair
    table = load_table(xlsx)
    record_verdict(load_table(csv), 0, "benign", None, default_store_path(csv))
    tsv = tmp_path / "samples.tsv"
    pd.read_csv(csv).to_csv(tsv, sep="\t", index=False)
    record_verdict(load_table(tsv), 1, "confirmed", None, default_store_path(tsv))  # the later verdict
    found = find_store(table, xlsx)
    assert (found.how, found.path) == ("content", default_store_path(tsv))
    record_verdict(table, 2, "open", None, default_store_path(xlsx))  # a store of its own name now
    assert find_store(table, xlsx).how == "name" and find_store(table, xlsx).path == default_store_path(xlsx)
    assert find_store(table, xlsx, tmp_path / "elsewhere.sqlite").how == "given"
    assert find_store(load_table(pd.read_csv(csv)), None) is None  # a data frame has no file, hence no store


def test_a_damaged_store_of_another_file_is_passed_over(pair):
    csv, xlsx = pair
    record_verdict(load_table(csv), 0, "benign", None, default_store_path(csv))
    broken = xlsx.with_name("other.csv" + store_module.STORE_SUFFIX)
    broken.write_bytes(b"SQLite format 3\x00" + b"\xff" * 200)  # a damaged file of another data file
    found = find_store(load_table(xlsx), xlsx)
    assert (found.how, found.path) == ("content", default_store_path(csv))
    assert broken.read_bytes().endswith(b"\xff" * 200)  # looked at, never changed


def test_a_damaged_store_of_the_data_itself_is_one_line_and_left_as_it_is(cli, pair):
    csv, _ = pair
    store = default_store_path(csv)
    store.write_bytes(b"not a database at all, but it is where the verdicts would be")
    before = store.read_bytes()
    for args in (("verdicts", csv), ("verdict", csv, "--row", "1", "--set", "benign"),
                 ("scan", csv, "--quiet")):
        code, _, err = cli(*args)
        assert code == 2, (args, err)
        assert_one_line_error(err, str(store))
    assert store.read_bytes() == before


def test_finding_a_store_creates_and_changes_nothing(pair, tmp_path):
    csv, xlsx = pair
    record_verdict(load_table(csv), 0, "benign", None, default_store_path(csv))
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    import investigator

    investigator.scan(xlsx)
    find_store(load_table(xlsx), xlsx)
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir()} == before


# -- when the records change ---------------------------------------------------------------------------------


def test_a_store_found_by_name_is_read_whatever_its_data_now_holds(cli, tmp_path):
    rows = samples()
    csv = write_csv(tmp_path / "samples.csv", rows)
    code, _, err = cli("verdict", csv, "--id", "sample", "--key", "S-103", "--set", "confirmed", "--note", "kept")
    assert code == 0, err
    rows[3][3] = 99.9  # the record of the verdict is corrected in the file
    write_csv(csv, rows[:-2])  # and two records are removed
    code, out, err = cli("verdicts", csv, "--id", "sample")
    assert code == 0, err
    assert "row 4 (sample S-103): confirmed" in out and "CHANGED since the verdict: moisture_pct" in out
    assert "kept" in out


def test_a_changed_copy_under_another_name_does_not_take_the_store_and_nothing_is_lost(cli, tmp_path):
    rows = samples()
    csv = write_csv(tmp_path / "samples.csv", rows)
    code, _, err = cli("verdict", csv, "--id", "sample", "--key", "S-103", "--set", "confirmed")
    assert code == 0, err
    before = history(default_store_path(csv))
    rows[3][3] = 99.9
    xlsx = write_xlsx(tmp_path / "corrected.xlsx", rows)
    code, out, err = cli("verdicts", xlsx, "--id", "sample")
    assert code == 0, err
    assert "No verdicts yet" in out and not default_store_path(xlsx).exists()
    # Given the original's store, its verdict is read on the corrected copy: changed, with both versions.
    code, out, err = cli("verdicts", xlsx, "--id", "sample", "--store", default_store_path(csv))
    assert code == 0, err
    assert "confirmed" in out and "CHANGED since the verdict: moisture_pct 12.61 -> 99.9" in out
    assert history(default_store_path(csv)) == before


def test_a_store_learns_each_content_it_is_used_with(tmp_path):
    rows = samples()
    csv = write_csv(tmp_path / "samples.csv", rows)
    record_verdict(load_table(csv), 0, "benign", None, default_store_path(csv))
    rows[3][3] = 99.9
    write_csv(csv, rows)  # the data changes under its own name; a verdict on it goes to the store by name
    record_verdict(load_table(csv), 1, "confirmed", None, default_store_path(csv))
    with ReviewStore(default_store_path(csv), create=False) as store:
        assert len(store.contents()) == 2
    copy = write_xlsx(tmp_path / "copy.xlsx", rows)  # the changed data under another name finds it
    assert find_store(load_table(copy), copy).path == default_store_path(csv)


def test_a_store_made_before_contents_were_kept_learns_them_with_its_next_verdict(tmp_path):
    csv = write_csv(tmp_path / "samples.csv", samples())
    path = default_store_path(csv)
    with sqlite3.connect(path) as db:  # a store as the first schema 1 wrote it: no contents table
        for statement in store_module._SCHEMA:  # the schema as it was: an old store
            db.execute(statement)
        db.execute("INSERT INTO meta VALUES ('schema_version', '1')")
        db.execute(f"PRAGMA application_id = {store_module.APPLICATION_ID}")
    xlsx = write_xlsx(tmp_path / "samples.xlsx", samples())
    with ReviewStore(path, create=False) as store:
        assert store.contents() == []
    assert find_store(load_table(xlsx), xlsx).how == "new"
    record_verdict(load_table(csv), 0, "benign", None, path)
    assert find_store(load_table(xlsx), xlsx).how == "content"


def test_a_verdict_stored_with_the_old_date_text_still_finds_its_record(tmp_path):
    # Before dates had one form, a date cell was fingerprinted as "2025-03-01T00:00:00"; such a verdict must
    # still match the record, from the .xlsx it was set on and from the .csv of the same records.
    rows = samples()
    xlsx = write_xlsx(tmp_path / "samples.xlsx", rows)
    csv = write_csv(tmp_path / "samples.csv", rows)
    table = load_table(xlsx)
    values = {k: (v.isoformat() if isinstance(v, dt.datetime) else v) for k, v in zip(COLUMNS, rows[6], strict=True)}
    old_texts = sorted((k, "" if v is None else str(v) if not isinstance(v, float) else repr(v))
                       for k, v in values.items())
    old = hashlib.sha256(json.dumps(old_texts, ensure_ascii=False, separators=(",", ":")).encode()).hexdigest()
    assert old != record_case(table, 6).fingerprint  # the old form differs from today's
    path = default_store_path(xlsx)
    with ReviewStore(path) as store:
        store.set(Case(case_id=f"fp:{old}", kind="record", row=7, fingerprint=old, values=values), "confirmed")
    for data in (table, load_table(csv)):
        with ReviewStore(path, create=False) as store:
            matching = match_store(data, store)
        assert matching.verdicts()[6] == "confirmed" and not matching.disappeared


# -- several records at once ---------------------------------------------------------------------------------


def test_several_records_get_one_entry_each_in_one_transaction(tmp_path):
    csv = write_csv(tmp_path / "samples.csv", samples())
    table = load_table(csv, id_column="sample")
    path = default_store_path(csv)
    record_verdict(table, 2, "follow-up", "ask the field team", path)
    entries = record_verdicts(table, [0, 2, 5, 2], "benign", None, path)
    assert [e.key for e in entries] == ["S-100", "S-102", "S-105"]  # once each, in the order given
    assert [e.note for e in entries] == ["", "ask the field team", ""]  # each keeps its own note
    assert len({e.at for e in entries}) == 1 and len(history(path)) == 4
    entries = record_verdicts(table, [0, 5], "confirmed", "lab error", path)
    assert {e.note for e in entries} == {"lab error"}
    with ReviewStore(path, create=False) as store:
        assert {e.key: e.verdict for e in store.current()} == {"S-100": "confirmed", "S-102": "benign",
                                                               "S-105": "confirmed"}


def test_a_batch_that_cannot_be_written_writes_nothing(tmp_path, monkeypatch):
    csv = write_csv(tmp_path / "samples.csv", samples())
    table = load_table(csv, id_column="sample")
    path = default_store_path(csv)
    record_verdict(table, 0, "benign", None, path)
    before = history(path)
    with pytest.raises(InputError, match="out of range"):
        record_verdicts(table, [1, 99], "confirmed", None, path)
    with pytest.raises(InputError, match="unknown verdict"):
        record_verdicts(table, [1, 2], "fraud", None, path)
    # A failure in the middle of the transaction (the third insert) leaves the store as it was.
    real = store_module.Entry
    made = []

    def failing(*args):
        made.append(args)
        if len(made) == 3:
            raise sqlite3.OperationalError("disk I/O error")
        return real(*args)

    monkeypatch.setattr(store_module, "Entry", failing)
    with pytest.raises(InputError, match="disk I/O error"):
        record_verdicts(table, [1, 2, 3, 4], "confirmed", None, path)
    assert history(path) == before


def test_identical_records_without_a_key_are_one_case(tmp_path):
    rows = samples(12)
    rows[7] = list(rows[3])  # an exact copy
    csv = write_csv(tmp_path / "samples.csv", rows)
    table = load_table(csv)
    entries = record_verdicts(table, [3, 7, 8], "benign", None, default_store_path(csv))
    assert len(entries) == 2 and entries[0].case_id == record_case(table, 7).case_id
