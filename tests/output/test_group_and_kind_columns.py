"""Large clusters (kinds of normal) and small groups in their own columns: `kind` for the kind of normal, `group`
for the small group only, both nullable integers in every output (JSON, CSV, Parquet, the cases export, XLSX).

The demo has two kinds of normal (day trips and overnight trips) and one small group (the split purchase), so
before this change its `group` column held the large clusters' ids as well."""

from __future__ import annotations

import csv
import json

import numpy as np
import openpyxl
import pandas as pd
import pytest

from investigator.report import write_report

pytestmark = pytest.mark.slow  # the demo is scanned once per session (conftest's demo_scan)


@pytest.fixture(scope="module")
def demo(demo_scan):
    _, result = demo_scan
    assert result.kinds is not None and result.groups.small_ids and result.groups.large_ids
    return result


def test_group_holds_small_groups_only_and_kind_every_records_kind(demo):
    small = demo.groups.small_ids
    frame = demo.to_frame()
    assert str(frame["group"].dtype) == "Int64" and str(frame["kind"].dtype) == "Int64"
    assert set(frame["group"].dropna().astype(int)) == set(small)
    members = np.isin(demo.groups.group, small)
    assert frame["group"].isna().to_numpy().tolist() == (~members).tolist()
    assert frame["kind"].astype(int).tolist() == (np.asarray(demo.kinds.labels) + 1).tolist()
    for i in np.flatnonzero(members)[:3]:
        record = demo.record(int(i))
        assert record["group"] in small and record["group_size"] == demo.groups.size_of(record["group"])
    outside = int(np.flatnonzero(~members)[0])
    assert demo.record(outside)["group"] is None and demo.record(outside)["group_size"] is None
    assert demo.record(outside)["kind"] == int(demo.kinds.labels[outside]) + 1


def test_the_run_record_says_which_kind_each_large_cluster_is(demo):
    groups = demo.run.structure["groups"]
    for g in groups:
        members = demo.groups.members(g["group"])
        if g["large"]:
            # A large cluster is a kind of normal: every record outside a small group in it is of that kind.
            assert set(np.asarray(demo.kinds.labels)[members] + 1) == {g["kind"]}
        else:
            assert "kind" not in g


def test_csv_and_parquet_write_whole_numbers_or_nothing(demo, tmp_path):
    demo.write(tmp_path / "scan.csv")
    demo.write(tmp_path / "scan.parquet")
    with (tmp_path / "scan.csv").open(newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    for name in ("group", "kind"):
        texts = {r[name] for r in rows}
        assert all(t == "" or t.isdigit() for t in texts), (name, sorted(texts)[:5])  # never "3.0"
    assert {r["group"] for r in rows} == {""} | {str(g) for g in demo.groups.small_ids}
    read = pd.read_parquet(tmp_path / "scan.parquet")
    assert str(read["group"].dtype) == "Int64" and str(read["kind"].dtype) == "Int64"
    assert read["group"].isna().sum() == demo.n_records - sum(demo.groups.size_of(g) for g in demo.groups.small_ids)


def test_json_records_have_null_for_no_group(demo, tmp_path):
    demo.write(tmp_path / "scan.json")
    records = json.loads((tmp_path / "scan.json").read_text())["records"]
    groups = {r["group"] for r in records}
    assert groups == {None} | set(demo.groups.small_ids)
    assert all(isinstance(r["kind"], int) for r in records)


def test_the_cases_export_has_kind_and_the_small_group(demo, tmp_path):
    write_report(demo, tmp_path / "cases.csv")
    write_report(demo, tmp_path / "cases.xlsx")
    table = pd.read_csv(tmp_path / "cases.csv", dtype=str, keep_default_na=False)
    assert {"kind", "pattern", "group"} <= set(table.columns)
    assert set(table["group"]) <= {""} | {str(g) for g in demo.groups.small_ids}
    assert all(t.isdigit() for t in table["kind"])
    sheet = openpyxl.load_workbook(tmp_path / "cases.xlsx").active
    header = [c.value for c in sheet[1]]
    kinds = [row[header.index("kind")] for row in sheet.iter_rows(min_row=2, values_only=True)]
    groups = [row[header.index("group")] for row in sheet.iter_rows(min_row=2, values_only=True)]
    assert all(isinstance(k, int) for k in kinds)
    assert {g for g in groups} <= {None} | set(demo.groups.small_ids)
