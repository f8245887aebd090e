"""Messy but valid input is read as the person who typed it meant it; hostile input is refused in one line.

The references are outside the project: the numbers we wrote (and Python's own ``float()`` of the cells with
their currency signs and thousands separators removed), pandas' ``read_csv(decimal=",", thousands=".")`` for
decimal commas, and pandas' reading of the same table written cleanly. All data is invented here with a fixed
seed.
"""

from __future__ import annotations

import json
import os
import shutil
from html import escape

import numpy as np
import openpyxl
import pandas as pd
import pytest
from numpy.testing import assert_allclose, assert_array_equal

import investigator
from fixtures.tables import make_frame
from investigator import InputError
from investigator.cli.main import main
from investigator.io.numbers import read_cell, read_numbers
from investigator.io.tables import load_table
from investigator.prepare.roles import assign_roles
from investigator.report import write_report

PLANTED = 123  # 0-based position of the record whose amount is ten times what its quantity implies (n // 2 when
# the table is smaller)


def purchases(n: int = 500, seed: int = 7) -> tuple[pd.DataFrame, np.ndarray, list[int], list[int]]:
    """Invented purchases: amount = quantity x unit price (noisy), written '$1,234.50'; 6% '-' placeholders and
    a few '#N/A'; record PLANTED has ten times its amount. Returns the table as text, the amounts written,
    and the positions of the placeholders and of the error values."""
    rng = np.random.default_rng(seed)
    qty = rng.integers(25, 60, n)
    amount = np.round(qty * rng.normal(42.0, 2.0, n), 2)
    planted = PLANTED if n > PLANTED else n // 2
    amount[planted] = round(amount[planted] * 10, 2)
    others = [i for i in range(n) if i != planted]
    dashes = sorted(rng.choice(others, int(0.06 * n), replace=False).tolist())
    errors = sorted(rng.choice([i for i in others if i not in dashes], 4, replace=False).tolist())
    cells = [f"${a:,.2f}" for a in amount]
    for i in dashes:
        cells[i] = "-"
    for i in errors:
        cells[i] = "#N/A"
    frame = pd.DataFrame({
        "order": [f"PO-{i:05d}" for i in range(n)],
        "qty": qty,
        "amount": cells,
        "region": rng.choice(["north", "south", "east", "west"], n),
    })
    return frame, amount, dashes, errors


@pytest.mark.slow
def test_currency_amounts_are_numbers_and_the_planted_one_is_flagged(tmp_path):
    frame, amount, dashes, errors = purchases()
    path = tmp_path / "purchases.csv"
    frame.to_csv(path, index=False)
    assert frame["amount"].str.contains(",").sum() > 400  # most amounts are over 1,000: thousands separators
    result = investigator.scan(path, id="order")
    assert "amount" in result.features.names
    read = result.table.frame["amount"].to_numpy()
    # Reference: the amounts we generated, and Python's float() of each cell with '$' and ',' removed.
    missing = sorted(dashes + errors)
    assert np.flatnonzero(np.isnan(read)).tolist() == missing
    keep = np.setdiff1d(np.arange(len(frame)), missing)
    assert_array_equal(read[keep], amount[keep])
    assert_array_equal(read[keep], [float(c.replace("$", "").replace(",", "")) for c in frame["amount"][keep]])
    # The planted amount is flagged (before numbers were read from such cells, the column was left out as an
    # identifier and the record was not flagged).
    assert result.flagged[PLANTED]
    notices = [n for n in result.run.notices if n.startswith("amount: read as numbers")]
    assert len(notices) == 1, result.run.notices
    notice = notices[0]
    formatted = len(frame) - len(missing)
    assert f"{formatted} currency/thousands-formatted values" in notice
    assert f"{len(dashes)} placeholders ('-')" in notice
    # pandas itself reads '#N/A' as missing; it is then no cell of the column to count.
    assert "read as missing" in notice
    # The notice reaches the user: the text summary and the JSON.
    assert notice in result.summary()
    result.write(tmp_path / "out.json")
    record = json.loads((tmp_path / "out.json").read_text(encoding="utf-8"))
    assert notice in record["run"]["notices"]


@pytest.mark.slow
def test_loader_notices_reach_the_report(tmp_path):
    # The standard library's html.escape is the reference for how the text is shown.
    frame, *_ = purchases(80, seed=11)
    frame.to_csv(tmp_path / "purchases.csv", index=False)
    result = investigator.scan(tmp_path / "purchases.csv", id="order")
    notice = next(n for n in result.run.notices if n.startswith("amount: read as numbers"))
    html = write_report(result, tmp_path / "report.html", generated="fixed").read_text(encoding="utf-8")
    assert escape(notice, quote=False) in html.replace("&#x27;", "'").replace("&#39;", "'")


def test_spreadsheet_errors_and_placeholders_in_xlsx_are_counted(tmp_path):
    frame, amount, dashes, errors = purchases(80, seed=3)
    cells = frame["amount"].tolist()
    errors_cells = ["#DIV/0!", "#VALUE!", "#REF!", "#NAME?"]
    for i, e in zip(errors, errors_cells, strict=True):
        cells[i] = e
    book = openpyxl.Workbook()
    ws = book.active
    ws.append(list(frame.columns))
    for row, cell in zip(frame.itertuples(index=False), cells, strict=True):
        # Some amounts as the spreadsheet's own numbers, the rest as typed text: a mixed column.
        value = float(cell.replace("$", "").replace(",", "")) if cell.startswith("$") and row.qty % 2 else cell
        ws.append([row.order, int(row.qty), value, row.region])
    book.save(tmp_path / "purchases.xlsx")
    table = load_table(tmp_path / "purchases.xlsx", id_column="order")
    read = table.frame["amount"].to_numpy()
    missing = sorted(dashes + errors)
    assert np.flatnonzero(np.isnan(read)).tolist() == missing
    keep = np.setdiff1d(np.arange(len(frame)), missing)
    assert_array_equal(read[keep], amount[keep])
    notice = next(n for n in table.notices if n.startswith("amount:"))
    assert f"{len(dashes)} placeholders ('-')" in notice
    assert "4 spreadsheet errors" in notice and "'#DIV/0!'" in notice


def test_frame_object_column_of_formatted_numbers():
    frame, amount, dashes, errors = purchases(60, seed=5)
    table = load_table(frame, id_column="order")
    keep = np.setdiff1d(np.arange(60), dashes + errors)
    assert_array_equal(table.frame["amount"].to_numpy()[keep], amount[keep])
    assert table.frame["order"].tolist() == frame["order"].tolist()  # the key is never converted
    assert frame["amount"].str.startswith(("$", "-", "#")).all()  # the caller's frame is left as it was


@pytest.mark.parametrize("cell, value", [
    # Reference: Python's float() of the same number written plainly.
    ("$1,234.50", float("1234.50")),
    ("-$1,234.50", float("-1234.50")),
    ("$-12.00", float("-12.00")),
    ("(1,234.00)", float("-1234.00")),  # accounting negative
    ("€ 1.234,56", float("1234.56")),
    ("1 234,56 €", float("1234.56")),
    ("£0.99", float("0.99")),
    ("12.30 EUR", float("12.30")),
    ("USD 7", float("7")),
    ("12%", float("12")),  # percent points, as written
    ("1'234.5", float("1234.5")),
    ("−3.5", float("-3.5")),  # the Unicode minus
    ("1.5e3", float("1500")),
])
def test_one_cell(cell, value):
    parsed = read_cell(cell)
    assert parsed is not None
    decimal = "," if cell.startswith("€") or cell.endswith("€") else "."
    assert parsed.value(decimal) == value


@pytest.mark.parametrize("cells", [
    ["2025-03-09", "2025-03-10", "2025-04-01", "-"],  # dates
    ["03/09/2025", "12/10/2024", "01/01/2025", "n/a"],
    ["00123", "00456", "01234", "-"],  # codes with leading zeros
    ["red", "green", "blue", "-"],
    ["12 kg", "3 kg", "7 kg", "-"],  # units are not currencies
    ["A-123", "B-7", "C-12", "-"],
])
def test_columns_that_are_not_numbers_stay_as_they_are(cells):
    assert read_numbers(pd.Series(cells * 10)) is None


def test_key_column_is_never_converted(tmp_path):
    frame = make_frame("parts").assign(part_id=[f"${i},000.00" for i in range(len(make_frame("parts")))])
    frame.to_csv(tmp_path / "keys.csv", index=False)
    table = load_table(tmp_path / "keys.csv", id_column="part_id")
    assert table.frame["part_id"].tolist() == frame["part_id"].tolist()


def test_looks_numeric_but_not_used_says_why(tmp_path):
    frame = make_frame("parts")
    cells = [f"{v:.2f}" for v in frame["width"]]
    for i in range(0, len(cells), 6):
        cells[i] = "see note"
    frame["width"] = cells
    frame.to_csv(tmp_path / "notes.csv", index=False)
    result = investigator.scan(tmp_path / "notes.csv", id="part_id")
    assert "width" not in result.features.names
    notice = next(n for n in result.run.notices if n.startswith("width:"))
    assert "looks numeric" in notice and "'see note' in row 1" in notice


def test_mixed_currencies_are_not_added_up():
    column = read_numbers(pd.Series(["$12.00", "€13.00", "$14.50", "€9.99"] * 5))
    assert column is not None and column.numbers is None
    assert "more than one currency" in column.notice("price")


# -- decimal commas ------------------------------------------------------------------------------------------


def _decimal_comma_file(path, n: int = 60, seed: int = 9):
    rng = np.random.default_rng(seed)
    qty = rng.integers(2, 40, n)
    amount = np.round(qty * rng.normal(85.0, 4.0, n), 2)
    amount[17] = round(amount[17] * 10, 2)

    def comma(v: float) -> str:  # 1234.5 -> '1.234,50'
        return f"{v:,.2f}".replace(",", " ").replace(".", ",").replace(" ", ".")

    lines = ["id;qty;amount;weight"] + [
        f"R{i:03d};{q};{comma(a)};{str(w).replace('.', ',')}"
        for i, (q, a, w) in enumerate(zip(qty, amount, np.round(rng.normal(3.0, 0.2, n), 1), strict=True))
    ]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def test_decimal_comma_matches_pandas_with_decimal_comma(tmp_path):
    path = _decimal_comma_file(tmp_path / "semi.csv")
    # Reference: pandas told the decimal mark and the thousands separator.
    reference = pd.read_csv(path, sep=";", decimal=",", thousands=".")
    assert reference["amount"].max() > 1000  # some amounts have a thousands dot
    for decimal in (None, ","):
        result = investigator.scan(path, id="id", decimal=decimal)
        frame = result.table.frame
        for name in ("qty", "amount", "weight"):
            assert_allclose(frame[name].to_numpy(dtype=float), reference[name].to_numpy(dtype=float), rtol=0,
                            atol=0, err_msg=name)
        assert {"amount", "weight"} <= set(result.features.names)
        assert result.flagged[17]
        assert result.run.input.decimal == ","
        assert any(n.startswith("amount: read as numbers with a decimal comma") for n in result.run.notices)


def test_ambiguous_thousands_take_the_files_decimal_mark(tmp_path):
    """'1.234' alone is 1.234 or 1234; in a file whose other columns show a decimal comma it is 1234."""
    rng = np.random.default_rng(4)
    n = 30
    count = rng.integers(1, 9, n) * 1000 + rng.integers(100, 999, n)  # 1000..9999: always a thousands dot
    prices = [f"{p:.2f}".replace(".", ",") for p in rng.uniform(1, 9, n)]  # '3,45': clearly a decimal comma
    lines = ["id;count;price"] + [f"K{i};{c // 1000}.{c % 1000:03d};{p}"
                                  for i, (c, p) in enumerate(zip(count, prices, strict=True))]
    path = tmp_path / "counts.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    auto = load_table(path, id_column="id")
    assert_array_equal(auto.frame["count"].to_numpy(), count.astype(float))  # the numbers we wrote
    assert any(n.startswith("count:") and "--decimal ." in n for n in auto.notices), auto.notices
    told = load_table(path, id_column="id", decimal=",")
    assert_array_equal(told.frame["count"].to_numpy(), count.astype(float))
    point = load_table(path, id_column="id", decimal=".")
    # Told the decimal point, '1.234' is 1.234 (what pandas reads by default) and '3,45' is not a number.
    assert_allclose(point.frame["count"].to_numpy(), pd.read_csv(path, sep=";")["count"].to_numpy())
    assert any(n.startswith("price: looks numeric") for n in point.notices), point.notices


def test_decimal_option_is_checked_and_reaches_the_run_record(tmp_path, capsys):
    with pytest.raises(InputError, match="`decimal`"):
        investigator.scan(make_frame("parts"), decimal=";")
    path = _decimal_comma_file(tmp_path / "semi.csv")
    assert main(["scan", str(path), "--decimal", ",", "--quiet", "--out", str(tmp_path / "o.json")]) == 0
    record = json.loads((tmp_path / "o.json").read_text(encoding="utf-8"))
    assert record["run"]["parameters"]["decimal"] == ","
    assert record["run"]["input"]["decimal"] == ","
    assert main(["scan", str(path), "--decimal", ";"]) == 2
    assert "--decimal" in capsys.readouterr().err


# -- rows, line ends, headers --------------------------------------------------------------------------------


def test_extra_field_later_in_the_file_is_refused_naming_the_line(tmp_path):
    frame = make_frame("parts")
    lines = [",".join(frame.columns)] + [",".join(map(str, r)) for r in frame.values.tolist()]
    lines[30] += ",9.5"
    (tmp_path / "late.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"late.csv: line 31 has 6 fields but the header has 5"):
        load_table(tmp_path / "late.csv")


def test_trailing_delimiter_on_data_lines_only_is_ignored_with_a_notice(tmp_path):
    frame = make_frame("parts")
    lines = [",".join(frame.columns)] + [",".join(map(str, r)) + "," for r in frame.values.tolist()]
    (tmp_path / "trail.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    frame.to_csv(tmp_path / "clean.csv", index=False)
    table = load_table(tmp_path / "trail.csv", id_column="part_id")
    # Reference: pandas' reading of the same table without the trailing delimiters; nothing shifted.
    pd.testing.assert_frame_equal(table.frame, pd.read_csv(tmp_path / "clean.csv", dtype={"part_id": str}))
    assert any("trailing delimiter" in n and "line 2" in n for n in table.notices)


@pytest.mark.parametrize("ending", ["\r", "\r\n"])
def test_cr_line_endings_with_a_quoted_multiline_field(tmp_path, ending):
    frame = make_frame("parts")
    frame["note"] = np.where(np.arange(len(frame)) % 5 == 0, "two\nlines", "one line")
    frame.to_csv(tmp_path / "lf.csv", index=False)
    text = (tmp_path / "lf.csv").read_text(encoding="utf-8")
    (tmp_path / "mac.csv").write_bytes(text.replace("\n", ending).encode("utf-8"))
    table = load_table(tmp_path / "mac.csv", id_column="part_id")
    # Reference: pandas reading the LF version (the line break inside quotes comes back as LF).
    expected = pd.read_csv(tmp_path / "lf.csv", dtype={"part_id": str})
    pd.testing.assert_frame_equal(table.frame.drop(columns="note"), expected.drop(columns="note"))
    assert table.frame["note"].str.replace("\r\n", "\n").str.replace("\r", "\n").tolist() == expected["note"].tolist()


def _title_rows_book(path, header_at: int = 3):
    frame = make_frame("parts")
    book = openpyxl.Workbook()
    ws = book.active
    ws.append(["Quarterly parts inspection"])
    ws.merge_cells(start_row=1, start_column=1, end_row=1, end_column=len(frame.columns))
    for _ in range(header_at - 2):
        ws.append([])
    ws.append(list(frame.columns))
    for row in frame.values.tolist():
        ws.append(row)
    book.save(path)
    return frame


def test_xlsx_title_rows_above_the_header(tmp_path):
    frame = _title_rows_book(tmp_path / "titled.xlsx")
    table = load_table(tmp_path / "titled.xlsx", id_column="part_id")
    assert list(table.frame.columns) == list(frame.columns)
    assert table.frame["part_id"].tolist() == frame["part_id"].tolist()
    assert_array_equal(table.frame["width"].to_numpy(), frame["width"].to_numpy())
    assert any(n.startswith("header found on row 3") for n in table.notices), table.notices
    assert table.source.header_row == 3
    given = load_table(tmp_path / "titled.xlsx", id_column="part_id", header_row=3)
    assert not any(n.startswith("header found") for n in given.notices)
    pd.testing.assert_frame_equal(given.frame, table.frame)
    with pytest.raises(InputError, match=r"titled\.xlsx: header_row=999, but sheet '.+' has \d+ rows"):
        load_table(tmp_path / "titled.xlsx", id_column="part_id", header_row=999)


def test_csv_title_rows_and_the_header_row_option(tmp_path, capsys):
    frame = make_frame("parts")
    frame.to_csv(tmp_path / "clean.csv", index=False)
    text = (tmp_path / "clean.csv").read_text(encoding="utf-8")
    (tmp_path / "titled.csv").write_text("Parts inspection,,,,\nexported 2025-03-31,,,,\n" + text, encoding="utf-8")
    found = load_table(tmp_path / "titled.csv", id_column="part_id")
    reference = pd.read_csv(tmp_path / "clean.csv", dtype={"part_id": str})
    pd.testing.assert_frame_equal(found.frame, reference)
    assert any(n.startswith("header found on row 3") for n in found.notices)
    given = load_table(tmp_path / "titled.csv", id_column="part_id", header_row=3)
    pd.testing.assert_frame_equal(given.frame, reference)
    assert main(["scan", str(tmp_path / "titled.csv"), "--header-row", "3", "--quiet"]) == 0
    assert main(["scan", str(tmp_path / "titled.csv"), "--header-row", "999", "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "--header-row 999" in err and "titled.csv" in err and err.count("\n") == 1


def test_first_row_of_numbers_gets_a_notice(tmp_path):
    frame = make_frame("parts")[["width", "height", "weight"]]
    frame.to_csv(tmp_path / "headless.csv", index=False, header=False)
    table = load_table(tmp_path / "headless.csv")
    assert any(n.startswith("the first row looks like data") for n in table.notices)
    assert not any(n.startswith("the first row looks like data") for n in load_table(frame.assign(x=1)).notices)


def test_xlsx_formulas_without_saved_values(tmp_path):
    frame = make_frame("parts")
    book = openpyxl.Workbook()
    ws = book.active
    ws.append(list(frame.columns) + ["area"])
    for i, row in enumerate(frame.values.tolist(), start=2):
        ws.append(row + [f"=B{i}*C{i}"])  # openpyxl writes the formula only: no value is saved with it
    book.save(tmp_path / "formulas.xlsx")
    result = investigator.scan(tmp_path / "formulas.xlsx", id="part_id")
    notice = next(n for n in result.run.notices if "formulas without saved values" in n)
    assert "'area'" in notice and "export CSV" in notice


# -- encodings -----------------------------------------------------------------------------------------------


@pytest.mark.parametrize("order", ["utf-16-le", "utf-16-be"])
def test_utf16_without_a_byte_order_mark_is_read_with_a_notice(tmp_path, order):
    frame = make_frame("parts")
    frame["batch"] = np.where(np.arange(len(frame)) % 3 == 0, "Süd", "Nord")
    frame.to_csv(tmp_path / "u16.csv", index=False, encoding=order)  # Python's codec writes no mark for -le/-be
    assert not (tmp_path / "u16.csv").read_bytes().startswith((b"\xff\xfe", b"\xfe\xff"))
    table = load_table(tmp_path / "u16.csv", id_column="part_id")
    # Reference: pandas told the encoding.
    pd.testing.assert_frame_equal(table.frame, pd.read_csv(tmp_path / "u16.csv", encoding=order,
                                                           dtype={"part_id": str}))
    assert table.source.encoding == order
    assert any("no byte-order mark" in n and order in n for n in table.notices)


def test_utf16_odd_byte_count_through_the_api(tmp_path):
    raw = make_frame("parts").to_csv(index=False).encode("utf-16")
    (tmp_path / "cut.csv").write_bytes(raw[:-1])
    with pytest.raises(InputError, match="cut.csv: starts with a UTF-16 byte-order mark but has an odd number"):
        load_table(tmp_path / "cut.csv")


def test_codes_with_leading_zeros_are_not_numbers(tmp_path):
    frame = make_frame("parts")
    codes = [f"{(i * 37) % 1000:05d}" for i in range(len(frame))]
    codes[3] = "-"
    frame["article"] = codes
    frame.to_csv(tmp_path / "codes.csv", index=False)
    table = load_table(tmp_path / "codes.csv", id_column="part_id")
    assert table.frame["article"].tolist()[:3] == codes[:3]  # kept as written, zeros and all
    roles = {c.name: c.role for c in assign_roles(table)}
    assert roles["article"] != "numeric"


# -- files that are not what their name says -----------------------------------------------------------------


def test_parquet_named_csv_is_read_as_parquet(tmp_path):
    frame = make_frame("parts")
    frame.to_parquet(tmp_path / "parts.parquet", index=False)
    shutil.copy(tmp_path / "parts.parquet", tmp_path / "parts.csv")
    as_csv = load_table(tmp_path / "parts.csv", id_column="part_id")
    pd.testing.assert_frame_equal(as_csv.frame, pd.read_parquet(tmp_path / "parts.parquet"))
    assert any("really a Parquet file" in n for n in as_csv.notices)


def test_xlsx_named_csv_is_read_as_xlsx(tmp_path):
    frame = make_frame("parts")
    frame.to_excel(tmp_path / "parts.xlsx", index=False)
    shutil.copy(tmp_path / "parts.xlsx", tmp_path / "parts.csv")
    as_csv = load_table(tmp_path / "parts.csv", id_column="part_id")
    pd.testing.assert_frame_equal(as_csv.frame, pd.read_excel(tmp_path / "parts.xlsx"))
    assert any("really an .xlsx workbook" in n for n in as_csv.notices)


@pytest.mark.parametrize("size", [40, 3000])
def test_random_bytes_of_any_size_are_not_a_text_table(tmp_path, size):
    raw = np.random.default_rng(size).bytes(size).replace(b"\x00", b"\x20")
    (tmp_path / "noise.csv").write_bytes(raw)
    with pytest.raises(InputError, match="noise.csv: is not a text table"):
        load_table(tmp_path / "noise.csv")


@pytest.mark.skipif(os.geteuid() == 0, reason="root reads any file whatever its permissions")
def test_unreadable_file(tmp_path):
    make_frame("parts").to_csv(tmp_path / "locked.csv", index=False)
    (tmp_path / "locked.csv").chmod(0)
    with pytest.raises(InputError, match="locked.csv: cannot read: permission denied"):
        load_table(tmp_path / "locked.csv")


def test_unreadable_file_through_the_cli(tmp_path, capsys, monkeypatch):
    """The error the operating system raises for a file without read permission (as root cannot be denied,
    the read is made to raise it here)."""
    path = tmp_path / "locked.csv"
    make_frame("parts").to_csv(path, index=False)
    real = type(path).read_bytes

    def denied(self):
        if self.name == "locked.csv":
            raise PermissionError(13, "Permission denied", str(self))
        return real(self)

    monkeypatch.setattr(type(path), "read_bytes", denied)
    assert main(["scan", str(path), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "locked.csv: cannot read: permission denied" in err and err.count("\n") == 1
