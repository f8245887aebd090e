"""Snapshots of the Cases and Record screens at 80x24 and 120x40 (pytest-textual-snapshot).

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
