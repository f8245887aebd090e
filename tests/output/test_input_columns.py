"""The records' own values in the outputs: CSV and Parquet results carry the input columns after the result
columns, chosen with ``columns``, filtered with ``where``; on an invented purchase-order export shaped like a
user's (fixtures/order_file.py): integer codes with missing cells, currency text, day-first dates, names with
commas and quotes, a column named like a result column, a memo starting with '='."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

import investigator
from fixtures.order_file import BIG, FORMULA, MANY, order_frame, write_order_file
from investigator.errors import InputError
from investigator.output.columns import RESULT_COLUMNS, output_names

pytestmark = pytest.mark.slow  # each test scans the order file (about two seconds)


@pytest.fixture(scope="module")
def orders(tmp_path_factory):
    folder = tmp_path_factory.mktemp("orders")
    path = write_order_file(folder)
    return path, investigator.scan(path, id="order_no")


def test_csv_and_parquet_carry_every_input_column_after_the_result_columns(orders, tmp_path):
    path, result = orders
    source = pd.read_csv(path, dtype=str, keep_default_na=False)
    for out in (tmp_path / "scan.csv", tmp_path / "scan.parquet"):
        frame = pd.read_csv(result.write(out)) if out.suffix == ".csv" else pd.read_parquet(result.write(out))
        inputs = ["order_no", "vendor", "vendor_code", "vendor_name", "quantity", "unit_price", "amount", "ordered",
                  "input.rank", "memo"]
        assert list(frame.columns[-len(inputs):]) == inputs  # after the result columns, in file order
        assert list(frame.columns[:3]) == ["row", "key", "rank"] and len(frame) == result.n_records
        assert frame["rank"].tolist() == result.rank.tolist()  # the result's rank; the buyer's is input.rank
        assert frame["input.rank"].tolist() == source["rank"].tolist()
        assert frame["order_no"].tolist() == frame["key"].tolist()
        expected = order_frame()
        # Currency text read as the numbers it says ($48,250.00), to the cent.
        np.testing.assert_allclose(frame["amount"], expected["amount"].astype(float), rtol=0, atol=0.005)
        assert frame.loc[BIG - 1, "amount"] == 48250.0 and frame.loc[MANY - 1, "quantity"] == 900
        assert frame["ordered"].tolist() == source["ordered"].tolist()  # dates as written: 13/03/2025
        names = frame["vendor_name"].tolist()
        assert names == source["vendor_name"].tolist()
        assert 'The "Blue Anchor" Chandlery' in names and "Harrow & Finch, Ltd" in names


def test_integer_codes_with_missing_cells_stay_whole_numbers(orders, tmp_path):
    path, result = orders
    text = result.write(tmp_path / "scan.csv").read_text(encoding="utf-8")
    rows = pd.read_csv(tmp_path / "scan.csv", dtype=str, keep_default_na=False)
    codes = rows["vendor_code"].tolist()
    assert "" in codes and "17" in codes and not any(c.endswith(".0") for c in codes)
    assert ",17.0," not in text
    parquet = pd.read_parquet(result.write(tmp_path / "scan.parquet"))
    assert str(parquet["vendor_code"].dtype) == "Int64" and parquet["vendor_code"].isna().sum() > 0


def test_a_formula_in_an_input_cell_is_neutralised_in_csv_and_kept_in_parquet(orders, tmp_path):
    # OWASP "CSV Injection": a cell starting with = + - @ is shown, never run, by a spreadsheet.
    _, result = orders
    rows = pd.read_csv(result.write(tmp_path / "scan.csv"), dtype=str, keep_default_na=False)
    assert rows.loc[3, "memo"] == "'" + FORMULA
    assert set(rows["memo"]) >= {"'+ delivery charge", "'-5% agreed", "'@ dock 3", "restock, urgent"}
    assert pd.read_parquet(result.write(tmp_path / "scan.parquet")).loc[3, "memo"] == FORMULA


def test_columns_chooses_the_input_columns_in_the_order_given(orders, tmp_path):
    _, result = orders
    frame = pd.read_csv(result.write(tmp_path / "scan.csv", columns=["memo", "amount", "input.rank"]))
    assert list(frame.columns[-3:]) == ["memo", "amount", "input.rank"]
    assert "vendor" not in frame.columns
    none = pd.read_csv(result.write(tmp_path / "scan.csv", columns=()))
    assert list(none.columns) == list(result.to_frame(()).columns)
    assert none.columns[-1] != "memo" and "order_no" not in none.columns
    assert list(result.to_frame("vendor, amount").columns[-2:]) == ["vendor", "amount"]


def test_an_unknown_column_is_one_line_naming_it_and_the_columns_there_are(orders, tmp_path):
    _, result = orders
    with pytest.raises(InputError) as caught:
        result.write(tmp_path / "scan.csv", columns=["amount", "amout"])
    message = str(caught.value)
    assert "\n" not in message and caught.value.parameters == ("columns",)
    assert "no column 'amout'" in message and "did you mean 'amount'" in message
    assert "order_no, vendor, vendor_code, vendor_name, quantity" in message
    assert not (tmp_path / "scan.csv").exists()


def test_where_writes_only_the_records_it_holds_for(orders, tmp_path):
    path, result = orders
    truth = order_frame()
    frame = pd.read_csv(result.write(tmp_path / "scan.csv", where="amount > 5000 AND vendor = 'Q17'"))
    expected = truth.index[(truth["amount"] > 5000) & (truth["vendor"] == "Q17")] + 1
    assert frame["row"].tolist() == expected.tolist() and BIG in expected
    # Day-first dates compare as dates (13/03/2025 is after 30/06/2025 as text, not as a date).
    frame = pd.read_csv(result.write(tmp_path / "scan.csv", where="ordered > '2025-06-30' AND flagged"))
    late = truth.index[(truth["ordered"] > "2025-06-30") & result.flagged] + 1
    assert frame["row"].tolist() == late.tolist()
    # The result's rank and the buyer's.
    frame = pd.read_csv(result.write(tmp_path / "scan.csv", where="rank <= 3 AND input.rank = 'lead'"))
    assert all(result.rank[r - 1] <= 3 and truth["rank"][r - 1] == "lead" for r in frame["row"])
    frame = pd.read_csv(result.write(tmp_path / "scan.csv", where="vendor_name LIKE '%, ltd' OR memo LIKE '=%'"))
    assert set(frame["row"]) == set(truth.index[(truth["vendor"] == "Q17") | (truth["memo"] == FORMULA)] + 1)
    frame = pd.read_csv(result.write(tmp_path / "scan.csv", where="vendor_code IS NULL"))
    assert frame["row"].tolist() == (truth.index[truth["vendor_code"].isna()] + 1).tolist()


def test_where_filters_the_json_records_and_columns_does_not_apply_to_json(orders, tmp_path):
    _, result = orders
    document = json.loads(result.write(tmp_path / "scan.json", where="quantity >= 900").read_text())
    assert [r["row"] for r in document["records"]] == [MANY]
    assert "memo" not in document["records"][0]  # the JSON holds no input values (docs/output.md)
    with pytest.raises(InputError, match="a .json result holds none"):
        result.write(tmp_path / "other.json", columns=["amount"])


def test_a_bad_condition_is_refused_before_anything_is_written(orders, tmp_path):
    _, result = orders
    out = tmp_path / "scan.csv"
    out.write_text("earlier\n")
    for condition, words in [("amount >", "position 9: expected a value"),
                             ("amout > 5", "no column 'amout' (did you mean 'amount'?)"),
                             ("amount > 'lots'", "column 'amount' holds numbers")]:
        with pytest.raises(InputError, match="`where`") as caught:
            result.write(out, where=condition)
        assert words in str(caught.value) and "\n" not in str(caught.value)
    assert out.read_text() == "earlier\n"


def test_names_like_result_columns_get_the_input_prefix_in_every_output():
    names = output_names(["row", "amount", "rank", "score_isolation", "score_total", "input.rank", "case", "note"])
    assert names == {"row": "input.row", "amount": "amount", "rank": "input.input.rank",
                     "score_isolation": "input.score_isolation", "score_total": "score_total",
                     "input.rank": "input.rank", "case": "input.case", "note": "input.note"}
    assert {"verdict", "group", "kind", "within_consensus", "changed_since_verdict"} <= RESULT_COLUMNS


def test_every_result_column_of_the_outputs_is_reserved(orders, tmp_path):
    # A name in RESULT_COLUMNS can never clash: each column a result or the cases table writes is listed.
    from investigator.output.columns import is_result_name
    from investigator.report import write_report

    _, result = orders
    written = list(result.to_frame(()).columns)
    write_report(result, tmp_path / "cases.csv", columns=())
    written += list(pd.read_csv(tmp_path / "cases.csv").columns)
    assert all(is_result_name(c) for c in written), [c for c in written if not is_result_name(c)]


def test_parquet_input_keeps_its_column_types(tmp_path):
    frame = order_frame(120)
    frame["vendor_code"] = frame["vendor_code"].astype(float)  # whole numbers, stored as doubles
    path = tmp_path / "orders.parquet"
    frame.to_parquet(path)
    out = pd.read_parquet(investigator.scan(path, id="order_no").write(tmp_path / "scan.parquet"))
    assert out["vendor_code"].dtype == np.float64
    assert pd.api.types.is_datetime64_any_dtype(out["ordered"])
    assert (out["ordered"].to_numpy() == frame["ordered"].to_numpy()).all()
