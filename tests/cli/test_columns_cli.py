"""--columns, --no-columns and --where on the command line: scan and check (the records written with --out),
report (the cases table), open (what the workspace starts with): exit 0 with the chosen columns and rows, or 2
with one line naming the flag and what is wrong, before the scan wherever that can be told."""

from __future__ import annotations

import pandas as pd
import pytest
from openpyxl import load_workbook

from fixtures.cli import assert_one_line_error, run
from fixtures.order_file import BIG, FORMULA, order_frame, write_order_file

pytestmark = pytest.mark.slow  # each test scans the invented order file (about two seconds)


@pytest.fixture
def orders(tmp_path):
    return write_order_file(tmp_path)


def test_scan_out_csv_has_the_input_columns_and_where_keeps_the_rows(cli, orders, tmp_path):
    out = tmp_path / "scan.csv"
    code, stdout, err = cli("scan", orders, "--id", "order_no", "--out", out,
                            "--where", "amount > 5000 AND vendor = 'Q17'")
    assert code == 0, err
    truth = order_frame()
    expected = (truth.index[(truth["amount"] > 5000) & (truth["vendor"] == "Q17")] + 1).tolist()
    frame = pd.read_csv(out)
    assert frame["row"].tolist() == expected and BIG in expected
    assert list(frame.columns[-3:]) == ["ordered", "input.rank", "memo"]
    assert f"Result written to {out}: {len(expected):,} of 240 records (those --where holds for)" in stdout


def test_columns_and_no_columns(cli, orders, tmp_path):
    out = tmp_path / "scan.parquet"
    code, _, err = cli("scan", orders, "--id", "order_no", "--out", out, "--columns", "memo,amount", "--quiet")
    assert code == 0, err
    assert list(pd.read_parquet(out).columns[-2:]) == ["memo", "amount"]
    code, _, err = cli("check", orders, "--reference", orders, "--id", "order_no", "--out", out, "--no-columns",
                       "--quiet")
    assert code == 0, err
    assert "memo" not in pd.read_parquet(out).columns and "order_no" not in pd.read_parquet(out).columns


@pytest.mark.parametrize("args, words", [
    (["--out", "{tmp}/s.csv", "--columns", "amount,amout"],
     ["--columns amount,amout: no column 'amout' in orders.csv (did you mean 'amount'?)", "order_no, vendor"]),
    (["--out", "{tmp}/s.csv", "--where", "amout > 5"],
     ["--where: position 1: no column 'amout' (did you mean 'amount'?)", "the input columns are: order_no"]),
    (["--out", "{tmp}/s.csv", "--where", "amount > "], ["--where: position 10: expected a value or a column"]),
    (["--out", "{tmp}/s.csv", "--where", "vendor = 'Q17"], ["--where: position 10: the text starting with '"]),
    (["--where", "amount > 5"], ["--where applies to the records written with --out; add --out FILE"]),
    (["--columns", "amount"], ["--columns applies to the records written with --out"]),
    (["--out", "{tmp}/s.json", "--no-columns"], ["a .json result holds no input columns, so --no-columns"]),
    (["--out", "{tmp}/s.csv", "--columns", " , "], ["--columns ' , ': give column names separated by commas"]),
    (["--out", "{tmp}/s.csv", "--columns", "amount", "--no-columns"], ["not allowed with argument"]),
    (["--out", "{tmp}/s.csv", "--where", "stability > 0.5"], ["--where: position 1: no column 'stability'"]),
])
def test_bad_use_is_one_line_and_exit_2(cli, orders, tmp_path, args, words):
    code, _, err = cli("scan", orders, "--id", "order_no", *[a.format(tmp=tmp_path) for a in args])
    assert code == 2
    assert_one_line_error(err, *words)
    assert not (tmp_path / "s.csv").exists()


def test_a_column_mistake_costs_no_scan(orders, tmp_path, monkeypatch):
    # The names are checked once the file is read, before the scan: the engine's run_scan is never reached.
    import investigator.pipeline.engine as engine
    from investigator.cli.main import main

    def refuse(*args, **kwargs):
        raise AssertionError("the scan ran")

    monkeypatch.setattr(engine, "run_scan", refuse)
    assert main(["scan", str(orders), "--out", str(tmp_path / "s.csv"), "--columns", "nope"]) == 2
    assert main(["scan", str(orders), "--out", str(tmp_path / "s.csv"), "--where", "nope = 1"]) == 2
    assert main(["report", str(orders), "--out", str(tmp_path / "c.csv"), "--where", "nope = 1"]) == 2


def test_report_cases_table_has_the_input_columns_and_where_keeps_the_cases(cli, orders, tmp_path):
    out = tmp_path / "cases.xlsx"
    code, stdout, err = cli("report", orders, "--id", "order_no", "--out", out, "--where", "quantity > 100 OR "
                            "amount > 40000")
    assert code == 0, err
    sheet = load_workbook(out).active
    headers = [c.value for c in sheet[1]]
    assert headers[:4] == ["case", "rank", "row", "key"] and headers[-2:] == ["input.rank", "memo"]
    keys = [row[3] for row in sheet.iter_rows(min_row=2, values_only=True)]
    truth = order_frame()
    assert sorted(keys) == sorted(truth.loc[(truth["quantity"] > 100) | (truth["amount"] > 40000), "order_no"])
    assert f"Cases table written to {out}: {len(keys)} cases for which --where holds" in stdout
    big = next(r for r in sheet.iter_rows(min_row=2, values_only=True) if r[3] == f"PO-2025-{BIG:04d}")
    assert big[headers.index("vendor_name")] == "Harrow & Finch, Ltd" and big[headers.index("amount")] == 48250
    assert big[headers.index("ordered")] == truth.loc[BIG - 1, "ordered"].strftime("%d/%m/%Y")  # as written


def test_cases_table_csv_and_xlsx_neutralise_a_formula_in_an_input_cell(cli, orders, tmp_path):
    # The line with the formula memo is not flagged; a verdict makes it a case.
    code, _, err = cli("verdict", orders, "--id", "order_no", "--key", "PO-2025-0004", "--set", "follow-up")
    assert code == 0, err
    code, _, err = cli("report", orders, "--id", "order_no", "--out", tmp_path / "cases.csv",
                       "--where", "memo LIKE '=%' OR flagged", "--columns", "memo,amount")
    assert code == 0, err
    table = pd.read_csv(tmp_path / "cases.csv", dtype=str, keep_default_na=False)
    assert list(table.columns[-2:]) == ["memo", "amount"]
    assert "'" + FORMULA in table["memo"].tolist()
    code, _, err = cli("report", orders, "--id", "order_no", "--out", tmp_path / "cases.xlsx",
                       "--where", "memo LIKE '=%'")
    assert code == 0, err
    sheet = load_workbook(tmp_path / "cases.xlsx").active
    headers = [c.value for c in sheet[1]]
    cell = sheet.cell(row=2, column=headers.index("memo") + 1)
    assert cell.data_type == "s" and cell.value == "'" + FORMULA


def test_report_html_refuses_columns_and_where(cli, orders, tmp_path):
    for flag in (["--where", "amount > 5"], ["--no-columns"], ["--columns", "amount"]):
        code, _, err = cli("report", orders, "--out", tmp_path / "r.html", *flag)
        assert code == 2
        assert_one_line_error(err, f"{flag[0]} applies to the cases table (--out cases.xlsx or cases.csv)")


def test_help_names_the_options():
    for command in ("scan", "check", "report", "open"):
        out = run(command, "--help").stdout
        assert "--columns" in out and "--no-columns" in out and "--where" in out, command
