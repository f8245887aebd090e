"""Nothing cut silently, and the ways between the screens (issue 16, points 4 and 5): every key of every screen
and widget is in the help, every footer fits 80 and 120 columns, the status lines keep their height and list
every column hit, notifications stand above the status line; 1/2/3 go to the screen itself from anywhere, the
Map shows the principal components at once and the UMAP map from a worker (stoppable), the cursor record is
drawn as ◉, a group's members open their record."""

from __future__ import annotations

import importlib
import inspect
import pkgutil
import threading

import numpy as np
import pytest

pytest.importorskip("textual")

from textual.screen import Screen  # noqa: E402
from textual.widget import Widget  # noqa: E402
from textual.widgets import Footer  # noqa: E402

import investigator.tui  # noqa: E402
from fixtures.tui import open_first_group, run_async, screen_text, settle, wait_until  # noqa: E402
from investigator.io.demo import DEMO_ID, write_demo  # noqa: E402
from investigator.pipeline.options import ScanOptions  # noqa: E402
from investigator.tui import jobs  # noqa: E402
from investigator.tui.app import InvestigatorApp  # noqa: E402
from investigator.tui.models.columns import sketch  # noqa: E402
from investigator.tui.models.map import MapPoints  # noqa: E402
from investigator.tui.plain import fit_lines  # noqa: E402
from investigator.tui.screens.help import describe, help_entries, help_text, key_name  # noqa: E402
from investigator.tui.widgets.cases_table import CasesTable  # noqa: E402
from investigator.tui.widgets.map_canvas import MapCanvas  # noqa: E402
from investigator.tui.widgets.member_list import MemberList  # noqa: E402

SIZES = [(80, 24), (120, 40)]


def classes_with_keys() -> list[type]:
    """Every App, Screen and Widget class of investigator/tui that declares its own BINDINGS."""
    found = []
    for info in pkgutil.walk_packages(investigator.tui.__path__, "investigator.tui."):
        module = importlib.import_module(info.name)
        for _, cls in inspect.getmembers(module, inspect.isclass):
            if cls.__module__ == module.__name__ and "BINDINGS" in vars(cls) and \
                    issubclass(cls, Screen | Widget | InvestigatorApp):
                found.append(cls)
    return found


def test_the_help_lists_every_binding_of_every_screen_and_widget():
    classes = classes_with_keys()
    # The discovery itself must find the screens and widgets with keys, or the check below proves nothing.
    names = {c.__name__ for c in classes}
    assert {"InvestigatorApp", "CasesScreen", "CasesTable", "MapCanvas", "MapScreen", "GroupScreen", "MemberList",
            "RecordScreen", "ColumnsScreen", "ColumnChooser", "VerdictScreen", "HelpScreen", "ScreensScreen"} <= names
    sections = InvestigatorApp("unused.csv").help_sections()
    entries = help_entries(sections)
    text = help_text(sections)
    for cls in classes:
        for binding in cls.BINDINGS:
            keys = key_name(binding.key)
            hits = [(t, k, d) for t, k, d in entries if d == describe(binding) and keys in k.split(" / ")]
            assert hits, f"{cls.__name__}: key {binding.key!r} ({describe(binding)}) is not in the help"
            title, k, d = hits[0]
            assert f"  {k:<12} {d}" in text.split(f"\n{title}\n" if title != "Everywhere" else "Everywhere\n")[1]


def test_long_texts_end_with_an_ellipsis():
    import pandas as pd

    levels = pd.Series(["Engineering"] * 5 + ["Field Service"] * 3 + ["HR"] * 2)
    assert sketch(levels) == "Engineeri… 50% · Field Ser… 30% · HR 20%"
    assert sketch(levels, level_width=None) == "Engineering 50% · Field Service 30% · HR 20%"
    # Wrapped into a fixed number of lines: whole when it fits, else the last line says it goes on.
    assert fit_lines("nights three_sigma, boxplot_fence; amount boxplot_fence", 40, 2) == [
        "nights three_sigma, boxplot_fence;", "amount boxplot_fence"]
    cut = fit_lines("one two three four five six seven eight", 10, 2)
    assert cut == ["one two", "three fou…"] and all(len(line) <= 10 for line in cut)


# -- driven through the pilot ---------------------------------------------------------------------------------
def demo_app(path) -> InvestigatorApp:
    return InvestigatorApp(path, ScanOptions(id=DEMO_ID), autoscan=True, show_hint=True)


class HeldMap:
    """Stands in for the UMAP worker: reports one step, then waits until the test lets it go (no timing)."""

    def __init__(self) -> None:
        self.started, self.go = threading.Event(), threading.Event()

    def __enter__(self) -> HeldMap:
        return self

    def __exit__(self, *_) -> None:
        self.go.set()  # a failed assertion must not leave the worker waiting when the app closes

    def __call__(self, result, progress, token):
        progress("fitting UMAP", 0.2)
        self.started.set()
        self.go.wait()
        if token.cancelled:
            raise jobs.MapCancelled
        coords = np.column_stack([np.arange(result.n_records), np.zeros(result.n_records)]).astype(float)
        return MapPoints(coords, "the UMAP map of the features", "computed")


def footer_right(app) -> tuple[int, int]:
    footer = app.screen.query_one(Footer)
    right = max((w.region.right for w in footer.walk_children() if w.region.width), default=0)
    return right, footer.region.right


@pytest.mark.slow
@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
@run_async
async def test_every_footer_fits_80_and_120_columns(tmp_path, monkeypatch, size):
    held = HeldMap()
    monkeypatch.setattr(jobs, "umap_map", held)
    app = demo_app(write_demo(tmp_path))
    async with app.run_test(size=size) as pilot:
        with held:
            await footers(app, pilot, held)


async def footers(app, pilot, held) -> None:
    await settle(app, pilot)
    seen = []

    async def check(name: str) -> None:
        await pilot.pause()
        right, edge = footer_right(app)
        assert right <= edge, f"{name}: the footer needs {right} columns of {edge}"
        seen.append(name)

    await check("Cases")
    await pilot.press("1")
    await check("Columns")
    await pilot.press("2", "enter")
    await wait_until(pilot, lambda: getattr(app.screen, "view", None) is not None)
    await check("Record")
    await pilot.press("3")
    await wait_until(pilot, lambda: app.map_progress is not None and held.started.is_set())
    await check("Map, the UMAP map being computed")  # its longest footer: esc Stop UMAP too
    assert "Stop UMAP" in screen_text(app).splitlines()[-1]
    held.go.set()
    await settle(app, pilot)
    await check("Map")
    canvas = app.screen.query_one(MapCanvas)
    for _ in range(len(canvas.flag_order)):
        await pilot.press("n")
        if app.result.groups.pattern[canvas.selected()] == "group":
            break
    await pilot.press("o")
    await settle(app, pilot)
    await check("Group")
    assert seen == ["Cases", "Columns", "Record", "Map, the UMAP map being computed", "Map", "Group"]


@pytest.mark.slow
@run_async
async def test_the_screen_keys_go_to_the_screen_itself_from_anywhere(tmp_path):
    app = demo_app(write_demo(tmp_path))
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(app, pilot)
        await pilot.press("enter")  # a Record from Cases
        await settle(app, pilot)
        await pilot.press("3")
        await settle(app, pilot)
        await pilot.press("n", "enter")  # a Record from the Map
        await settle(app, pilot)
        assert type(app.screen).__name__ == "RecordScreen"
        await pilot.press("2")  # Cases, not the Record last opened there
        assert type(app.screen).__name__ == "CasesScreen"
        await pilot.press("3")
        assert type(app.screen).__name__ == "MapScreen"
        await pilot.press("question_mark")
        assert type(app.screen).__name__ == "HelpScreen"
        await pilot.press("1")  # from the help too
        assert type(app.screen).__name__ == "ColumnsScreen"


@pytest.mark.slow
@run_async
async def test_the_map_shows_principal_components_at_once_then_the_umap_map(tmp_path, monkeypatch):
    held = HeldMap()
    monkeypatch.setattr(jobs, "umap_map", held)
    app = demo_app(write_demo(tmp_path))
    async with app.run_test(size=(100, 30)) as pilot:
        with held:
            await pca_then_umap(app, pilot, held)


async def pca_then_umap(app, pilot, held) -> None:
    await settle(app, pilot)
    await pilot.press("3")
    await wait_until(pilot, lambda: app.map_points is not None and held.started.is_set())
    await pilot.pause()
    assert app.map_points.kind == "pca"
    text = screen_text(app)
    assert "principal components 1 and 2 (PCA), not the UMAP map (being computed)" in text
    assert "fitting UMAP" in text and "esc stops it" in text  # the progress line
    # PCA as numpy computes it: the canvas holds the scores on the first two right singular vectors.
    X = np.nan_to_num(np.asarray(app.result.features.values, dtype=float))
    X = X - X.mean(axis=0)
    _, _, vt = np.linalg.svd(X, full_matrices=False)
    shown = app.screen.query_one(MapCanvas).coords
    assert np.allclose(np.abs(shown), np.abs(X @ vt[:2].T))
    held.go.set()
    await settle(app, pilot)
    assert app.map_points.kind == "computed" and app.map_progress is None
    assert "Map: the UMAP map of the features" in screen_text(app)
    assert np.array_equal(app.screen.query_one(MapCanvas).coords[:, 0], np.arange(app.result.n_records))


@pytest.mark.slow
@run_async
async def test_esc_stops_the_umap_map_and_u_starts_it_again(tmp_path, monkeypatch):
    held = HeldMap()
    monkeypatch.setattr(jobs, "umap_map", held)
    app = demo_app(write_demo(tmp_path))
    async with app.run_test(size=(100, 30)) as pilot:
        with held:
            await stop_and_start(app, pilot, held)


async def stop_and_start(app, pilot, held) -> None:
    await settle(app, pilot)
    await pilot.press("3")
    await wait_until(pilot, lambda: held.started.is_set() and app.map_progress is not None)
    await pilot.press("escape")
    assert app.map_progress is None and app.map_token is None
    held.go.set()  # the stopped worker ends; what it would return is dropped
    await settle(app, pilot)
    assert app.map_points.kind == "pca"
    assert "u computes it" in screen_text(app)
    held.started.clear()
    await pilot.press("u")
    await settle(app, pilot)
    assert app.map_points.kind == "computed"


@pytest.mark.slow
@run_async
async def test_the_real_umap_map_replaces_the_principal_components(tmp_path):
    from investigator.structure.map import embed

    app = demo_app(write_demo(tmp_path))
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(app, pilot)
        await pilot.press("3")
        await settle(app, pilot)
        assert app.map_points.kind == "computed" and app.map_points.source == "the UMAP map of the features"
        # The map `scan --map auto` draws: the same function, seed and kept records give the same coordinates.
        X = np.nan_to_num(np.asarray(app.result.features.values, dtype=float))
        same = embed(X, "auto", seed=0, keep=app.result.flagged)
        assert same.method == "umap" and np.allclose(app.map_points.coords, same.coords)


@pytest.mark.slow
@run_async
async def test_the_cursor_record_is_drawn_as_a_ring_on_a_crosshair(tmp_path, monkeypatch):
    held = HeldMap()
    monkeypatch.setattr(jobs, "umap_map", held)  # the principal components stay: a fixed picture
    app = demo_app(write_demo(tmp_path))
    async with app.run_test(size=(100, 30)) as pilot:
        with held:
            await ring(app, pilot)


async def ring(app, pilot) -> None:
    await settle(app, pilot)
    await pilot.press("3")
    await wait_until(pilot, lambda: app.map_points is not None)
    canvas = app.screen.query_one(MapCanvas)
    await pilot.press("n")
    await pilot.pause()
    chosen = canvas.selected()
    x, y = canvas.cell_of(chosen)
    lines = canvas.render().plain.split("\n")
    assert lines[y][x] == "◉" and sum(line.count("◉") for line in lines) == 1
    # The crosshair: every empty cell of its row and column is a line.
    assert " " not in lines[y] and "─" in lines[y]
    assert all(line[x] != " " for line in lines) and any(line[x] == "│" for line in lines)
    assert f"◉ {app.result.keys[chosen]} (row {chosen + 1})" in screen_text(app)


@pytest.mark.slow
@run_async
async def test_group_members_are_a_list_whose_entries_open_their_record(tmp_path):
    app = demo_app(write_demo(tmp_path))
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        await open_first_group(app, pilot)
        members = app.screen.query_one(MemberList)
        case = app.screen.case
        assert members.option_count == case.size
        order = app.screen.order()
        assert sorted(order.tolist()) == sorted(m.row - 1 for m in case.members)
        assert list(app.cases.rank[order]) == sorted(app.cases.rank[order])  # most unusual first
        await pilot.press("down", "enter")
        await wait_until(pilot, lambda: getattr(app.screen, "view", None) is not None)
        assert type(app.screen).__name__ == "RecordScreen" and app.screen.position == int(order[1])
        await pilot.press("down")  # the next member, in the list's order
        assert app.screen.position == int(order[2])
        await pilot.press("escape")
        assert type(app.screen).__name__ == "GroupScreen"


@pytest.mark.slow
@run_async
async def test_the_status_line_lists_every_column_hit_and_keeps_its_height(tmp_path):
    app = demo_app(write_demo(tmp_path))
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        hits = app.result.column_hits
        most = max(range(len(hits)), key=lambda p: (len({h["column"] for h in hits[p]}), len(hits[p])))
        assert len({h["column"] for h in hits[most]}) >= 2, "the demo has a record with hits in two columns"
        detail = app.screen.query_one("#cases-detail")
        heights = {detail.region.height}
        await pilot.press("w")
        app.screen.query_one("#where").value = f"key = '{app.result.keys[most]}'"
        await pilot.press("enter")
        await pilot.pause()
        assert table.position == most
        heights.add(detail.region.height)
        text = " ".join(line.strip() for line in detail.render().plain.split("\n"))
        for h in hits[most]:  # every hit, each rule after its column
            assert f"{h['column']} " in text and h["rule"] in text
        assert heights == {3}


@pytest.mark.slow
@run_async
async def test_notifications_stand_above_the_status_line(tmp_path):
    app = demo_app(write_demo(tmp_path))
    async with app.run_test(size=(80, 24), notifications=True) as pilot:  # a test run shows none by default
        await settle(app, pilot)
        for name, status in (("2", "#cases-detail"), ("1", "#column-why"), ("3", "#map-legend")):
            await pilot.press(name)
            await settle(app, pilot)
            app.notify("A message long enough to take two or three lines of the notification box, to be sure.")
            await pilot.pause()
            await pilot.pause()
            line = app.screen.query_one(status).region
            toasts = [t.region for t in app.screen.query("Toast")]
            assert toasts, "the notification is shown"
            for toast in toasts:
                assert not toast.overlaps(line) and toast.bottom <= line.y, (name, toast, line)
            app.clear_notifications()
            await pilot.pause()
