"""Snapshots of the Cases and Record screens at 80x24 and 120x40 (pytest-textual-snapshot): as they open, Cases
scrolled sideways to the input columns and sorted by one, a WHERE condition that cannot be read, the column
chooser, and the Record screen at its record's own values.

Update after an intended change of the layout with ``pytest tests/tui/test_tui_snapshots.py --snapshot-update``
and look at the SVGs before committing them.
"""

from __future__ import annotations

import pytest

pytest.importorskip("pytest_textual_snapshot")
pytestmark = pytest.mark.slow  # the whole module: each snapshot scans the demo and renders the screen

from fixtures.tui import settle, wait_until  # noqa: E402
from investigator.io.demo import DEMO_ID, write_demo  # noqa: E402
from investigator.pipeline.options import ScanOptions  # noqa: E402
from investigator.tui.app import InvestigatorApp  # noqa: E402

SIZES = [(80, 24), (120, 40)]


def demo_app(tmp_path) -> InvestigatorApp:
    return InvestigatorApp(write_demo(tmp_path), ScanOptions(id=DEMO_ID), autoscan=True)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_cases_screen(snap_compare, tmp_path, size):
    async def scanned(pilot):
        await settle(pilot.app, pilot)

    assert snap_compare(demo_app(tmp_path), terminal_size=size, run_before=scanned)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_record_screen(snap_compare, tmp_path, size):
    async def record(pilot):
        await settle(pilot.app, pilot)
        await pilot.press("down", "enter")
        await wait_until(pilot, lambda: getattr(pilot.app.screen, "view", None) is not None)
        await pilot.pause()

    assert snap_compare(demo_app(tmp_path), terminal_size=size, run_before=record)


async def to_column(pilot, column: str) -> None:
    from investigator.tui.widgets.cases_table import CasesTable

    table = pilot.app.screen.query_one(CasesTable)
    while table.column != column:
        await pilot.press("right")


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_cases_scrolled_to_an_input_column(snap_compare, tmp_path, size):
    async def scrolled(pilot):
        await settle(pilot.app, pilot)
        await to_column(pilot, "amount")
        await pilot.press("s")
        await pilot.pause()

    assert snap_compare(demo_app(tmp_path), terminal_size=size, run_before=scrolled)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_cases_where_error(snap_compare, tmp_path, size):
    async def bad_condition(pilot):
        await settle(pilot.app, pilot)
        await pilot.press("w")
        pilot.app.screen.query_one("#where").value = "amount > 500 AND departmnt = 'Finance'"
        await pilot.press("enter")
        await pilot.pause()

    assert snap_compare(demo_app(tmp_path), terminal_size=size, run_before=bad_condition)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_column_chooser(snap_compare, tmp_path, size):
    async def chooser(pilot):
        await settle(pilot.app, pilot)
        await pilot.press("c")
        await pilot.pause()

    assert snap_compare(demo_app(tmp_path), terminal_size=size, run_before=chooser)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_record_screen_at_its_values(snap_compare, tmp_path, size):
    async def values(pilot):
        await settle(pilot.app, pilot)
        await pilot.press("down", "enter")
        await wait_until(pilot, lambda: getattr(pilot.app.screen, "view", None) is not None)
        screen = pilot.app.screen
        screen.query_one("#record-body").scroll_to_widget(screen.query_one("#record-row-title"), top=True,
                                                          animate=False)
        await pilot.pause()

    assert snap_compare(demo_app(tmp_path), terminal_size=size, run_before=values)
