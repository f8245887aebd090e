"""The report and the cases export show each case's cell findings (invented purchase-order lines with
planted power-of-ten slips, fixtures/cells.py): the same sentence the terminal prints, HTML-escaped."""

from __future__ import annotations

import html

import pandas as pd
import pytest

import investigator
from fixtures.cells import purchase_orders
from investigator.output.explanation import cell_sentence
from investigator.report import write_report


@pytest.fixture(scope="module")
def orders():
    frame, planted = purchase_orders()
    return frame, planted, investigator.scan(frame, options=investigator.ScanOptions(id="line"))


def test_report_lists_the_cells_that_look_wrong(orders, tmp_path):
    frame, planted, result = orders
    page = write_report(result, tmp_path / "r.html", cases=50).read_text(encoding="utf-8")
    assert "Cells that look wrong" in page
    for i in planted["x100"]:
        e = result.explain(key=frame.line[i])
        assert e.cells and e.cells[0].column == "amount"
        assert html.escape(cell_sentence(e.cells[0]), quote=True) in page  # escaped as the standard library does


def test_cases_export_carries_the_cells_column(orders, tmp_path):
    frame, planted, result = orders
    cases = pd.read_csv(write_report(result, tmp_path / "cases.csv"))
    by_key = cases.set_index("key")
    for i in planted["x100"] + planted["div10"]:
        e = result.explain(key=frame.line[i])
        assert by_key.loc[frame.line[i], "cells"].startswith(cell_sentence(e.cells[0]))
    without = cases.loc[cases.cells.isna(), "key"]
    assert 0 < len(without) < len(cases)  # not every case has a finding: the column is per record
