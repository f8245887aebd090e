"""Snapshots of the screens issue 16 (points 4 and 5) changed, at 80x24 and 120x40 (pytest-textual-snapshot):
the Map while the UMAP map is computed (the principal components, labelled, with the progress line; the
worker held at a known step by a stand-in, so the picture does not depend on timing), the Map with the
cursor record drawn as ◉ on its crosshair, the Group screen with its members as a list, the help, and the
Columns screen with a long level name whole in its status line.

Update after an intended change of the layout with
``pytest tests/tui/test_tui_snapshots_layout.py --snapshot-update`` and look at the SVGs before committing them.
"""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytest_textual_snapshot")
pytestmark = pytest.mark.slow  # the whole module: each snapshot scans the demo and renders the screen

from fixtures.tui import open_first_group, settle  # noqa: E402
from investigator.io.demo import DEMO_ID, write_demo  # noqa: E402
from investigator.pipeline.options import ScanOptions  # noqa: E402
from investigator.tui import jobs  # noqa: E402
from investigator.tui.app import InvestigatorApp  # noqa: E402
from investigator.tui.models.map import MapPoints  # noqa: E402

SIZES = [(80, 24), (120, 40)]


def held_map(result, progress, token):
    """Stands in for the UMAP worker: reports its fit and ends without a map (as a stopped one does), so the
    Map keeps showing the principal components and a progress line that does not move; nothing waits."""
    progress(f"fitting UMAP on {result.n_records:,} records", 0.2)
    raise jobs.MapCancelled


def demo_app(tmp_path) -> InvestigatorApp:
    return InvestigatorApp(write_demo(tmp_path), ScanOptions(id=DEMO_ID), autoscan=True, show_hint=False)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_map_while_the_umap_map_is_computed(snap_compare, tmp_path, size, monkeypatch):
    monkeypatch.setattr(jobs, "umap_map", held_map)

    async def computing(pilot):
        await settle(pilot.app, pilot)
        await pilot.press("3")
        await settle(pilot.app, pilot)
        assert pilot.app.map_progress is not None and pilot.app.map_points.kind == "pca"
        # The worker's step again (by way of 0, so that the bar takes it anew), now that the bar is laid out:
        # Textual rounds a bar's value to its width only once it has one, so the step, when it came before the
        # first layout, was drawn half a cell longer (the snapshot failed 1 run in 3 on it).
        stage, fraction = pilot.app.map_progress
        pilot.app.map_progress = (stage, 0.0)
        await pilot.pause()
        pilot.app.map_progress = (stage, fraction)
        await pilot.pause()

    assert snap_compare(demo_app(tmp_path), terminal_size=size, run_before=computing)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_map_cursor_record(snap_compare, tmp_path, size, monkeypatch):
    # A fixed map (no UMAP: its coordinates are the records' rank and consensus), the cursor on rank 1.
    def by_rank(result, progress, token):
        return MapPoints(np.column_stack([np.asarray(result.rank, float), np.asarray(result.consensus)]),
                         "the UMAP map of the features", "computed")

    monkeypatch.setattr(jobs, "umap_map", by_rank)

    async def cursor(pilot):
        await settle(pilot.app, pilot)
        await pilot.press("3")
        await settle(pilot.app, pilot)
        await pilot.press("n")
        await pilot.pause()

    assert snap_compare(demo_app(tmp_path), terminal_size=size, run_before=cursor)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_group_members_list(snap_compare, tmp_path, size):
    async def group(pilot):
        app = pilot.app
        await settle(app, pilot)
        await open_first_group(app, pilot)
        await pilot.press("down")
        await pilot.pause()

    assert snap_compare(demo_app(tmp_path), terminal_size=size, run_before=group)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_help_lists_every_key(snap_compare, tmp_path, size):
    async def keys(pilot):
        await settle(pilot.app, pilot)
        await pilot.press("question_mark")
        await pilot.pause()

    assert snap_compare(demo_app(tmp_path), terminal_size=size, run_before=keys)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_columns_a_long_level_name_whole_in_the_status_line(snap_compare, tmp_path, size):
    async def department(pilot):
        app = pilot.app
        await settle(app, pilot)
        await pilot.press("1")
        await pilot.pause()
        names = [r.name for r in app.loaded.rows]
        for _ in range(names.index("department")):
            await pilot.press("down")
        await pilot.pause()

    assert snap_compare(demo_app(tmp_path), terminal_size=size, run_before=department)
