"""The records' own values in the workspace: Cases shows the input columns after the result columns and scrolls
sideways to every one at 80x24, sorts by the column under the column cursor, filters by an SQL WHERE condition
(a bad one said in one line), chooses its columns; the Record screen shows every input column. On the invented
purchase-order export of fixtures/order_file.py (currency text, day-first dates, codes with missing cells,
names with commas and quotes, a column named like a result column)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

pytest.importorskip("textual")
pytestmark = pytest.mark.slow  # the whole module: each test drives the app through a scan

from fixtures.order_file import BIG, MANY, order_frame, write_order_file  # noqa: E402
from fixtures.tui import run_async, screen_text, settle, wait_until  # noqa: E402
from investigator.tui.app import InvestigatorApp  # noqa: E402
from investigator.tui.screens.column_chooser import ColumnChooser  # noqa: E402
from investigator.tui.widgets.cases_table import CasesTable  # noqa: E402

INPUTS = ["order_no", "vendor", "vendor_code", "vendor_name", "quantity", "unit_price", "amount", "ordered",
          "input.rank", "memo"]


@pytest.fixture
def orders(tmp_path):
    return write_order_file(tmp_path)


def orders_app(path, **kwargs) -> InvestigatorApp:
    return InvestigatorApp(path, {"id": "order_no"}, autoscan=True, show_hint=False, **kwargs)


async def cursor_to(pilot, table: CasesTable, column: str) -> None:
    ids = [c[0] for c in table.all_columns()]
    while table.column != column:
        await pilot.press("right" if ids.index(table.column) < ids.index(column) else "left")


def header(app) -> str:
    return next(line for line in screen_text(app).splitlines() if line.lstrip().startswith("rank"))


@run_async
async def test_every_column_is_reachable_sideways_at_80x24(orders):
    app = orders_app(orders)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        ids = [c[0] for c in table.all_columns()]
        assert ids[:2] == ["rank", "key"] and ids[-len(INPUTS):] == INPUTS  # inputs after the result columns
        assert header(app).rstrip().endswith("›") and "memo" not in header(app)  # more to the right, said so
        assert table.column == "consensus"  # the column cursor starts on the sort's column
        await cursor_to(pilot, table, "rank")
        seen = []
        for _ in ids[1:]:
            await pilot.press("right")
            line = header(app)
            label = dict((c[0], c[1]) for c in table.all_columns())[table.column]
            assert label[:6] in line, (table.column, line)  # the cursor column is always in view
            assert line.lstrip().startswith("rank key")      # rank and key stay at the left
            seen.append(table.column)
        assert seen == ids[1:] and table.column == "memo"
        assert "‹" in header(app) and not header(app).rstrip().endswith("›")
        first = table.position
        memo = order_frame()["memo"][first]
        assert memo[:10] in screen_text(app)
        for _ in ids:
            await pilot.press("left")
        assert table.column == "rank" and "‹" not in header(app)


@run_async
async def test_sorting_by_an_input_column(orders):
    truth = order_frame()
    app = orders_app(orders)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        await cursor_to(pilot, table, "amount")
        await pilot.press("s")
        assert table.sort == "amount" and "sorted by amount, highest first" in screen_text(app)
        amounts = truth["amount"].to_numpy()[table.order]
        assert (np.diff(amounts) <= 0).all() and table.order[0] == BIG - 1  # $48,250.00 first
        await pilot.press("s")  # again: the other direction
        assert (np.diff(truth["amount"].to_numpy()[table.order]) >= 0).all()
        # Day-first dates sort as dates, latest first (as text, 31/01 would come before 28/12).
        await cursor_to(pilot, table, "ordered")
        await pilot.press("s")
        assert "sorted by ordered, latest first" in screen_text(app)
        assert (np.diff(truth["ordered"].to_numpy()[table.order].astype(np.int64)) <= 0).all()
        # Codes with missing cells: the missing ones last, both ways.
        await cursor_to(pilot, table, "vendor_code")
        for _ in range(2):
            await pilot.press("s")
            codes = pd.Series(truth["vendor_code"].to_numpy()[table.order])
            missing = int(codes.isna().sum())
            assert missing and codes.isna().to_numpy()[-missing:].all()
        # Text A to Z.
        await cursor_to(pilot, table, "vendor_name")
        await pilot.press("s")
        names = truth["vendor_name"].to_numpy()[table.order].tolist()
        assert names == sorted(names) and "sorted by vendor_name, A to Z" in screen_text(app)


@run_async
async def test_where_filter_and_its_one_line_error(orders):
    truth = order_frame()
    app = orders_app(orders)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        ranking = app.result.ranking().tolist()
        await pilot.press("w", *"amount > 5000 AND vendor = 'Q17'", "enter")
        wanted = set(truth.index[(truth["amount"] > 5000) & (truth["vendor"] == "Q17")])
        assert table.order.tolist() == [p for p in ranking if p in wanted] and BIG - 1 in wanted
        assert "where amount > 5000 AND vendor = 'Q17'" in screen_text(app)
        assert table.has_focus
        # A bad condition: one line under the box, the filter as it was.
        before = table.order.tolist()
        box = app.screen.query_one("#where")
        await pilot.press("w")
        box.value = "amount > 5000 AND vendr = 'Q17'"
        await pilot.press("enter")
        text = screen_text(app)
        assert "Not applied: position 19: no column 'vendr' (did you mean 'vendor'?)" in text
        assert table.order.tolist() == before and box.has_focus
        box.value = "quantity >"
        await pilot.press("enter")
        assert "Not applied: position 11: expected a value or a column after '>'" in screen_text(app)
        await pilot.press("escape")  # leaves the box: what was typed is dropped, the error goes
        assert "Not applied" not in screen_text(app) and box.value == "amount > 5000 AND vendor = 'Q17'"
        # The result's columns and the input's: rank is the scan's, input.rank the buyer's.
        await pilot.press("w")
        box.value = "rank <= 20 AND input.rank = 'lead' OR quantity >= 900"
        await pilot.press("enter")
        result = app.result
        wanted = {p for p in range(result.n_records)
                  if (result.rank[p] <= 20 and truth["rank"][p] == "lead") or truth["quantity"][p] >= 900}
        assert set(table.order.tolist()) == wanted and MANY - 1 in wanted
        await pilot.press("x")
        assert len(table.order) == result.n_records and not box.display


@run_async
async def test_where_on_verdicts_follows_a_new_verdict(orders):
    app = orders_app(orders)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        await pilot.press("w", *"verdict IS NOT NULL", "enter")
        assert len(table.order) == 0
        await pilot.press("x", "v", "f", "enter")  # the first record: follow-up
        await settle(app, pilot)
        box = app.screen.query_one("#where")
        await pilot.press("w")
        box.value = "verdict = 'follow-up'"
        await pilot.press("enter")
        assert table.order.tolist() == [int(app.result.ranking()[0])]


@run_async
async def test_the_column_chooser(orders):
    app = orders_app(orders)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        await pilot.press("c")
        assert isinstance(app.screen, ColumnChooser)
        await pilot.press("n", "enter")  # no input columns
        assert isinstance(app.screen.query_one(CasesTable), CasesTable)
        assert not set(INPUTS) & {c[0] for c in table.all_columns()}
        assert "memo" not in header(app) and "consensus" in header(app)
        await pilot.press("c", "escape")  # cancelled: nothing changes
        assert not set(INPUTS) & {c[0] for c in table.all_columns()}
        await pilot.press("c")
        chooser = app.screen
        listing = chooser.query_one("#chooser-list")
        listing.select("amount")
        listing.select("memo")
        listing.deselect("votes")
        await pilot.press("enter")
        ids = [c[0] for c in table.all_columns()]
        assert ids[-2:] == ["amount", "memo"] and "votes" not in ids
        await pilot.press("c", "a", "enter")  # every column again: those chosen keep their place, then the rest
        rest = [c for c in INPUTS if c not in ("amount", "memo")]
        assert [c[0] for c in table.all_columns()][-len(INPUTS):] == ["amount", "memo", *rest]


@run_async
async def test_open_with_columns_and_where(orders):
    truth = order_frame()
    app = orders_app(orders, columns=("memo", "amount"), where="amount > 5000")
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        ids = [c[0] for c in table.all_columns()]
        assert ids[-2:] == ["memo", "amount"] and "vendor" not in ids
        assert set(table.order.tolist()) == set(truth.index[truth["amount"] > 5000])
        assert "amount > 5000" in screen_text(app)


@pytest.mark.parametrize("option, words", [({"columns": ("amout",)}, "no column 'amout'"),
                                           ({"where": "amout > 1"}, "no column 'amout'"),
                                           ({"where": "amount >"}, "position 9: expected a value")])
@run_async
async def test_open_with_a_wrong_column_or_condition_says_so_in_one_line(orders, option, words):
    app = orders_app(orders, **option)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        assert app.loaded is None and words in app.load_error and "\n" not in app.load_error
        assert words in screen_text(app)


@run_async
async def test_record_screen_shows_every_input_column(orders):
    truth = order_frame()
    app = orders_app(orders)
    async with app.run_test(size=(120, 70)) as pilot:
        await settle(app, pilot)
        await pilot.press("slash", *f"PO-2025-{BIG:04d}", "enter", "enter")
        await wait_until(pilot, lambda: getattr(app.screen, "view", None) is not None)
        await pilot.pause()
        text = screen_text(app)
        assert "The record as read: every column of the file" in text
        for name in ["order_no", "vendor_code", "vendor_name", "unit_price", "ordered", "rank", "memo"]:
            assert name in text
        row = truth.loc[BIG - 1]
        for value in ["Harrow & Finch, Ltd", "48250", "9650", row["ordered"].strftime("%d/%m/%Y"), row["rank"],
                      row["memo"] or "(empty)"]:
            assert value in text, value
        await pilot.press("down")  # the next record's values
        await pilot.pause()
        nxt = app.screen.position
        assert truth.loc[nxt, "order_no"] in screen_text(app)


def test_the_filter_of_cases_names_the_columns_as_the_csv_does(demo_scan):
    # The same condition on the Cases model and on the CSV rows (read back with pandas) selects the same records.
    from investigator.tui.models.cases import cases_data

    _, result = demo_scan
    data = cases_data(result)
    csv = result.to_frame()
    condition = "pattern = 'group' AND group = 3 AND note IS NULL AND input.note LIKE '%spare%' AND votes >= 0"
    expected = ((csv["pattern"] == "group") & (csv["group"] == 3) & csv["input.note"].str.contains("spare")).to_numpy()
    assert expected.sum() >= 3
    np.testing.assert_array_equal(data.where_mask(condition), expected)
    # Every name the filter takes is a CSV column's; verdict and note are there once a review store exists.
    assert set(data.frame().columns) - {"verdict", "note"} <= set(csv.columns)
