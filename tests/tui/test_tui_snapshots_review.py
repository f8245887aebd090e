"""Snapshots of the review screens at 80x24 and 120x40 (pytest-textual-snapshot): Cases with marked records and
the records that break a limit named in the status line, the dialog of a verdict on each marked record, and a
group with one verdict set on each member.

Update after an intended change of the layout with
``pytest tests/tui/test_tui_snapshots_review.py --snapshot-update`` and look at the SVGs before committing them.
"""

from __future__ import annotations

import pytest

pytest.importorskip("pytest_textual_snapshot")
pytestmark = pytest.mark.slow  # the whole module: each snapshot scans the demo and renders the screen

from fixtures.tui import open_first_group, settle  # noqa: E402
from investigator.io.demo import DEMO_ID, write_demo  # noqa: E402
from investigator.pipeline.options import ScanOptions  # noqa: E402
from investigator.tui.app import InvestigatorApp  # noqa: E402

SIZES = [(80, 24), (120, 40)]


def demo_app(tmp_path, **options) -> InvestigatorApp:
    return InvestigatorApp(write_demo(tmp_path), ScanOptions(id=DEMO_ID, **options), autoscan=True, show_hint=False)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_cases_with_marks_and_limits(snap_compare, tmp_path, size):
    limits = tmp_path / "limits.csv"
    limits.write_text("column,lower,upper\nnights,,3\n", encoding="utf-8")

    async def marked(pilot):
        await settle(pilot.app, pilot)
        await pilot.press("space", "space", "down", "space")
        await pilot.pause()

    assert snap_compare(demo_app(tmp_path, limits=str(limits)), terminal_size=size, run_before=marked)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_the_dialog_of_a_verdict_on_each_marked_record(snap_compare, tmp_path, size):
    async def asked(pilot):
        await settle(pilot.app, pilot)
        await pilot.press("space", "space", "v", "b")
        await pilot.pause()

    assert snap_compare(demo_app(tmp_path), terminal_size=size, run_before=asked)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_a_group_with_a_verdict_on_each_member(snap_compare, tmp_path, size):
    async def group(pilot):
        app = pilot.app
        await settle(app, pilot)
        await open_first_group(app, pilot)
        await pilot.press("a", "c", "enter")
        await settle(app, pilot)
        app.clear_notifications()  # the "Saved" notice carries the time it was shown at: not for a snapshot
        await pilot.pause()

    assert snap_compare(demo_app(tmp_path), terminal_size=size, run_before=group)
