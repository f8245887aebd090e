"""Duplicate screens on a small hand-made table and on generated tables checked against pandas."""

import json

import numpy as np
import pandas as pd
import pytest

from investigator.checks.duplicates import duplicates_on, exact_duplicates
from investigator.errors import InputError

NORTH, QUILL, ROOK = "North Quay Supplies", "Quillon Hardware", "Rookmere Stationers"  # invented vendors


@pytest.fixture
def claims():
    # Invented expense claims. Exact copies apart from claim_id: rows 1, 3, 8 and rows 5, 6 (amount and note
    # missing in both); same vendor + amount + date: rows 1, 3, 4, 8 and rows 5, 6; same vendor + amount
    # also rows 2, 7 (rows are 1-based).
    return pd.DataFrame({
        "claim_id": [101, 102, 103, 104, 105, 106, 107, 108],
        "vendor": [NORTH, QUILL, NORTH, NORTH, ROOK, ROOK, QUILL, NORTH],
        "amount": [100.0, 250.0, 100.0, 100.0, np.nan, np.nan, 250.0, 100.0],
        "date": pd.to_datetime(["2024-01-05", "2024-01-06", "2024-01-05", "2024-01-05", "2024-01-07",
                                "2024-01-07", "2024-01-09", "2024-01-05"]),
        "note": ["taxi", "hotel", "taxi", "dinner", None, np.nan, "hotel", "taxi"],
    })


def rows_of(report):
    return [g.rows for g in report.groups]


def test_exact_duplicates_leave_out_the_key(claims):
    report = exact_duplicates(claims, exclude=["claim_id"])
    assert rows_of(report) == [[1, 3, 8], [5, 6]]
    assert report.groups[0].values == {"vendor": "North Quay Supplies", "amount": 100.0, "date": "2024-01-05T00:00:00",
                                       "note": "taxi"}
    assert report.groups[1].values["amount"] is None and report.groups[1].values["note"] is None
    assert (report.n_groups, report.n_in_groups, report.n_extra) == (2, 5, 3)
    # With the unique key compared too, nothing can match.
    assert exact_duplicates(claims).groups == []


def test_exact_duplicates_on_the_feature_columns(claims):
    report = exact_duplicates(claims, columns=["vendor", "amount"])
    assert rows_of(report) == [[1, 3, 4, 8], [2, 7], [5, 6]]


def test_same_values_on_chosen_columns(claims):
    report = duplicates_on(claims, ["vendor", "amount", "date"], keys=claims["claim_id"].tolist())
    assert report.kind == "columns" and report.columns == ["vendor", "amount", "date"]
    assert rows_of(report) == [[1, 3, 4, 8], [5, 6]]
    assert [g.size for g in report.groups] == [4, 2]
    assert report.groups[0].keys == [101, 103, 104, 108]
    assert report.groups[0].values == {"vendor": "North Quay Supplies", "amount": 100.0, "date": "2024-01-05T00:00:00"}


def test_missing_values_equal_by_default_or_skipped(claims):
    # None and NaN in the object column "note" are both missing, and missing equals missing.
    assert rows_of(duplicates_on(claims, ["vendor", "note"])) == [[1, 3, 8], [2, 7], [5, 6]]
    # missing="skip": records with a missing compared value are in no group.
    assert rows_of(duplicates_on(claims, ["vendor", "amount", "date"], missing="skip")) == [[1, 3, 4, 8]]
    assert rows_of(exact_duplicates(claims, exclude=["claim_id"], missing="skip")) == [[1, 3, 8]]


def test_unknown_columns_are_an_input_error(claims):
    with pytest.raises(InputError) as info:
        duplicates_on(claims, ["vendor", "amont"])
    message = str(info.value)
    assert "\n" not in message
    assert "'amont'" in message
    assert "available columns: claim_id, vendor, amount, date, note" in message
    with pytest.raises(InputError, match="unknown column 'id'"):
        exact_duplicates(claims, exclude=["id"])
    with pytest.raises(InputError, match="at least one column"):
        duplicates_on(claims, [])
    with pytest.raises(InputError, match="no columns are left"):
        exact_duplicates(claims, columns=["vendor"], exclude=["vendor"])
    with pytest.raises(InputError, match="missing must be"):
        duplicates_on(claims, ["vendor"], missing="ignore")


def test_as_dict_is_plain_json(claims):
    d = json.loads(json.dumps(duplicates_on(claims, ["vendor", "date"]).as_dict(), allow_nan=False))
    assert d["groups"][0] == {"rows": [1, 3, 4, 8], "size": 4,
                              "values": {"vendor": "North Quay Supplies", "date": "2024-01-05T00:00:00"}}
    assert d["extra_records"] == sum(g["size"] - 1 for g in d["groups"])


def test_no_duplicates_and_tiny_tables():
    frame = pd.DataFrame({"a": [1, 2, 3], "b": ["x", "y", "z"]})
    assert exact_duplicates(frame).groups == []
    assert exact_duplicates(frame.iloc[:1]).groups == []
    assert exact_duplicates(frame.iloc[:0]).n_records == 0


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_groups_agree_with_pandas(seed):
    # Reference: pandas' DataFrame.duplicated(keep=False), which treats NaN as equal to NaN, and
    # groupby(dropna=False) for the grouping itself.
    rng = np.random.default_rng(seed)
    n = 400
    frame = pd.DataFrame({
        "vendor": rng.choice(["A", "B", "C", None], size=n),
        "amount": rng.choice([10.0, 20.0, np.nan], size=n),
        "day": rng.integers(1, 6, size=n),
        "memo": rng.integers(0, 10_000, size=n),
    })
    cols = ["vendor", "amount", "day"]
    report = duplicates_on(frame, cols)
    in_groups = sorted(r for g in report.groups for r in g.rows)
    assert in_groups == (np.flatnonzero(frame.duplicated(subset=cols, keep=False)) + 1).tolist()
    expected = sorted(sorted((idx + 1).tolist()) for idx in frame.groupby(cols, dropna=False).indices.values()
                      if len(idx) > 1)
    assert sorted(rows_of(report)) == expected
    # Every group's shared values are those of each of its rows.
    for g in report.groups:
        block = frame.iloc[np.array(g.rows) - 1][cols]
        assert len(block.drop_duplicates()) == 1
