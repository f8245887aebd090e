"""The investigation workspace driven through Textual's pilot on the demo data: each user action, and what
it leaves on screen, in the app's state or in the review store."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

pytest.importorskip("textual")
pytestmark = pytest.mark.slow  # the whole module: each test drives the app through a scan of the demo

from fixtures.tui import run_async, screen_text, settle, wait_until  # noqa: E402
from investigator.cli.options import flag_message  # noqa: E402
from investigator.io.demo import DEMO_ID, write_demo  # noqa: E402
from investigator.pipeline.options import ScanOptions  # noqa: E402
from investigator.review.matching import record_case  # noqa: E402
from investigator.review.store import ReviewStore, default_store_path  # noqa: E402
from investigator.tui.app import InvestigatorApp  # noqa: E402
from investigator.tui.widgets.cases_table import CasesTable  # noqa: E402
from investigator.tui.widgets.map_canvas import MapCanvas  # noqa: E402


@pytest.fixture
def demo(tmp_path):
    return write_demo(tmp_path)


def demo_app(path, autoscan: bool = True) -> InvestigatorApp:
    return InvestigatorApp(path, ScanOptions(id=DEMO_ID), autoscan=autoscan, show_hint=True)


async def open_map(app, pilot) -> MapCanvas:
    await settle(app, pilot)
    await pilot.press("3")
    await settle(app, pilot)
    return app.screen.query_one(MapCanvas)


async def goto_column(app, pilot, name: str) -> None:
    table = app.screen.query_one("#columns-table")
    names = [r.name for r in app.loaded.rows]
    while table.cursor_row != names.index(name):
        await pilot.press("down" if table.cursor_row < names.index(name) else "up")


# -- 1. Columns: roles and log transforms take effect in the rescan --------------------------------------------
@run_async
async def test_role_and_log_changes_take_effect_in_the_rescan(demo):
    app = demo_app(demo, autoscan=False)
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(app, pilot)
        assert app.current_mode == "columns" and app.result is None
        text = screen_text(app)
        assert "distance_km" in text and "numeric" in text and "categorical" in text
        await goto_column(app, pilot, "nights")
        await pilot.press("space")  # nights: feature -> excluded
        assert "excluded (was numeric)" in screen_text(app)
        await pilot.press("s")
        await settle(app, pilot)
        assert app.current_mode == "cases"
        first = app.result
        assert "nights" not in first.features.names
        assert "amount" in first.features.names
        amount_logged = "amount" in app.logged()

        await pilot.press("1")
        await settle(app, pilot)
        await goto_column(app, pilot, "nights")
        await pilot.press("space")  # back to feature
        await goto_column(app, pilot, "note")
        await pilot.press("space")  # a text column made a feature
        await goto_column(app, pilot, "amount")
        await pilot.press("l")      # flip amount's log decision
        await pilot.press("s")
        await settle(app, pilot)
        second = app.result
        assert second is not first
        assert "nights" in second.features.names and "note" in second.features.names
        assert ("amount" in app.logged()) is not amount_logged
        assert second.options.features is not None and "note" in second.options.features


# -- 2. Cases: sorting and filtering change the visible rows -----------------------------------------------------
@run_async
async def test_sorting_changes_the_visible_rows(demo):
    app = demo_app(demo)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        result = app.result
        shown = table.visible_positions()
        assert shown == list(result.ranking()[:len(shown)])  # consensus, highest first
        await pilot.press("right", "right", "right", "right")  # the column cursor: votes, pattern, verdict, robust
        assert table.column == "robust_distance"
        await pilot.press("s")  # sort by the column under the cursor
        assert table.sort == "robust_distance"
        by_score = table.visible_positions()
        expected = np.argsort(-result.scores("robust_distance"), kind="stable")[:len(by_score)]
        assert by_score == list(expected)
        assert by_score != shown
        await pilot.press("r")  # reversed: lowest score first
        low = table.visible_positions()[0]
        assert result.scores("robust_distance")[low] == result.scores("robust_distance").min()
        assert "sorted by robust_distance, lowest first" in screen_text(app)
        await pilot.press("s")  # again: the other direction
        assert table.visible_positions() == by_score


@run_async
async def test_filters_change_the_visible_rows(demo):
    app = demo_app(demo)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        result = app.result
        await pilot.press("f")  # flagged only
        assert len(table.order) == int(result.flagged.sum()) < result.n_records
        assert all(result.flagged[p] for p in table.visible_positions())
        await pilot.press("m", "m")  # flagged and flagged by local_density (the second method)
        assert table.order.tolist() == [p for p in result.ranking()
                                        if result.flagged[p] and result.flags("local_density")[p]]
        await pilot.press("x", "slash", *"CLM-1002")  # clear, then search on the key
        keys = [str(result.keys[p]) for p in table.order]
        assert keys and all("CLM-1002" in k for k in keys)
        assert len(keys) == sum("CLM-1002" in str(k) for k in result.keys)
        await pilot.press("enter", "x")
        assert len(table.order) == result.n_records


# -- 3. Record: the contributions of the selected row; moving updates it -------------------------------------------
@run_async
async def test_record_shows_the_contributions_of_the_selected_row(demo):
    app = demo_app(demo)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        await pilot.press("down", "down", "down")
        position = table.position
        assert position == table.visible_positions()[3]
        await pilot.press("enter")
        await wait_until(pilot, lambda: getattr(app.screen, "view", None) is not None)
        screen = app.screen
        assert screen.position == position
        expected = app.result.explain(row=position + 1)
        assert screen.view.explanation.key == expected.key
        bars = screen.query_one("#record-bars").render().plain
        for method, items in expected.contributions.items():
            top = items[0]  # the largest share of what pushes the record out: bars carry no signs
            assert method in bars and top.feature in bars and f"{top.share:.0%}" in bars
        assert f"Record {expected.key}" in screen_text(app)

        nxt = int(table.order[4])
        await pilot.press("down")
        await wait_until(pilot, lambda: screen.view is not None and screen.view.explanation.row == nxt + 1)
        assert screen.position == nxt
        await pilot.press("escape")
        assert isinstance(app.screen.query_one(CasesTable), CasesTable)


# -- 4. Map: the cursor opens the record at the cursor --------------------------------------------------------
@run_async
async def test_map_cursor_opens_the_right_record(demo):
    app = demo_app(demo)
    async with app.run_test(size=(100, 30)) as pilot:
        canvas = await open_map(app, pilot)
        assert canvas.coords is not None and canvas.coords.shape == (app.result.n_records, 2)
        await pilot.press("n")  # the flagged record of highest consensus
        first = int(app.result.ranking()[app.result.flagged[app.result.ranking()]][0])
        assert canvas.cursor == canvas.cell_of(first)
        await pilot.press("left", "up")
        x, y = canvas.cell_of(first)
        assert canvas.cursor == (max(0, x - 1), max(0, y - 1))
        chosen = canvas.selected()
        cells = canvas.cells()
        d = (cells[:, 0] - canvas.cursor[0]) ** 2 + (2 * (cells[:, 1] - canvas.cursor[1])) ** 2
        assert d[chosen] == d.min()  # the record nearest the cursor
        await pilot.press("enter")
        await wait_until(pilot, lambda: getattr(app.screen, "view", None) is not None)
        assert app.screen.position == chosen
        assert app.screen.view.explanation.row == chosen + 1


# -- 5. Verdict: typed in the UI, in the store afterwards, shown in Cases -------------------------------------
@run_async
async def test_a_verdict_typed_in_the_ui_is_in_the_store(demo):
    app = demo_app(demo)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        await pilot.press("down")
        position = table.position
        await pilot.press("v", "f", *"ask the approver", "enter")
        await settle(app, pilot)
        case = record_case(app.result.table, position)
        with ReviewStore(default_store_path(demo), create=False) as store:
            entry = store.get(case.case_id)
            assert entry.verdict == "follow-up" and entry.note == "ask the approver"
            assert entry.key == str(app.result.keys[position])
            changes = len(store.history())
        assert "follow-up" in screen_text(app) and "ask the approver" in screen_text(app)
        await pilot.press("d", "d", "d", "d", "d")  # verdict filter: follow-up
        assert table.order.tolist() == [position]

        await pilot.press("v", "c", "escape")  # cancelled: nothing written
        await settle(app, pilot)
        with ReviewStore(default_store_path(demo), create=False) as store:
            assert len(store.history()) == changes

        await pilot.press("enter")  # on the Record screen: keeps the note unless it is edited
        await settle(app, pilot)
        await pilot.press("v", "c", "enter")
        await settle(app, pilot)
        with ReviewStore(default_store_path(demo), create=False) as store:
            entry = store.get(case.case_id)
            assert (entry.verdict, entry.note) == ("confirmed", "ask the approver")
            assert len(store.history()) == changes + 1


@run_async
async def test_enter_alone_records_no_verdict_on_an_unreviewed_record(demo):
    app = demo_app(demo)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        position = app.screen.query_one(CasesTable).position
        await pilot.press("v", "enter")  # no state chosen: the dialog stays and says so
        await settle(app, pilot)
        assert type(app.screen).__name__ == "VerdictScreen"
        assert "choose a state first" in screen_text(app)
        assert not default_store_path(demo).exists() or app.cases.verdicts[position] is None
        await pilot.press("b", "enter")
        await settle(app, pilot)
        assert type(app.screen).__name__ != "VerdictScreen" and app.cases.verdicts[position] == "benign"


@run_async
async def test_verdicts_in_the_store_show_after_a_rescan(demo):
    app = demo_app(demo)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        position = app.screen.query_one(CasesTable).position
        await pilot.press("v", "b", *"known trip", "enter")
        await settle(app, pilot)
    again = demo_app(demo)
    async with again.run_test(size=(120, 40)) as pilot:
        await settle(again, pilot)
        assert again.cases.verdicts[position] == "benign" and again.cases.notes[position] == "known trip"


# -- 6. Help and the first-run hint ------------------------------------------------------------------------
@run_async
async def test_help_lists_the_keys_and_the_hint_explains_the_numbers(demo):
    app = demo_app(demo)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        text = screen_text(app)
        assert "consensus 0-1" in text and "votes" in text and "pattern" in text
        assert "Sort" in text  # the footer shows the screen's keys
        await pilot.press("i")
        assert "consensus 0-1" not in screen_text(app)
        await pilot.press("question_mark")
        assert type(app.screen).__name__ == "HelpScreen"
        helptext = app.screen.query_one("#help-text").render().plain
        for words in ("Open the highlighted member", "Filter: flagged only", "Feature/excluded", "Next flagged",
                      "Verdict", "votes"):
            assert words in helptext
        await pilot.press("escape")
        assert type(app.screen).__name__ == "CasesScreen"


# -- launch: a file that fails to load ------------------------------------------------------------------------
@run_async
async def test_a_file_that_fails_to_load_shows_the_error_and_asks_for_another(demo, tmp_path):
    app = InvestigatorApp(tmp_path / "missing.csv", ScanOptions(id=DEMO_ID))
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(app, pilot)
        text = screen_text(app)
        assert "Could not open the file" in text and "no such file" in text and "Traceback" not in text
        assert app.focused.id == "other-file"
        await pilot.press(*str(demo), "enter")
        await settle(app, pilot)
        assert app.loaded is not None and app.load_error is None
        assert "2,400 records" in screen_text(app)


# -- the UI keeps responding while a scan runs --------------------------------------------------------------
def held_scan(tmp_path, monkeypatch):
    """An app whose scan worker is held inside the engine until ``release`` is set, so a test does not
    depend on how fast this machine scans."""
    import threading

    import investigator.pipeline.engine as engine

    rng = np.random.default_rng(7)
    frame = pd.DataFrame(rng.normal(size=(20_000, 8)), columns=[f"x{i}" for i in range(8)])
    path = tmp_path / "large.csv"
    frame.to_csv(path, index=False)
    release = threading.Event()
    real = engine.run_scan

    def held(table, options, progress, *args, **kwargs):
        progress("held by the test", 0.05)
        release.wait(timeout=60)
        return real(table, options, progress, *args, **kwargs)

    monkeypatch.setattr(engine, "run_scan", held)
    return InvestigatorApp(path, ScanOptions()), release


async def start_held(app, pilot):
    await settle(app, pilot)
    await pilot.press("s")
    await wait_until(pilot, lambda: app.progress is not None and app.progress[0] == "held by the test")
    return next(w for w in app.workers if w.name == "scan")


@run_async
async def test_keys_are_handled_while_a_scan_runs(tmp_path, monkeypatch):
    app, release = held_scan(tmp_path, monkeypatch)
    async with app.run_test(size=(100, 30)) as pilot:
        scan = await start_held(app, pilot)
        table = app.screen.query_one("#columns-table")
        before = table.cursor_row
        await pilot.press("down", "down")
        assert table.cursor_row == before + 2 and scan.is_running
        await pilot.press("question_mark")
        assert type(app.screen).__name__ == "HelpScreen" and scan.is_running
        await pilot.press("escape")  # closes the help
        assert scan.is_running
        release.set()
        await wait_until(pilot, lambda: not scan.is_running)
        await settle(app, pilot)
        assert app.result is not None and app.current_mode == "cases"


@run_async
async def test_a_running_scan_can_be_cancelled(tmp_path, monkeypatch):
    from investigator.tui.jobs import ScanCancelled

    app, release = held_scan(tmp_path, monkeypatch)
    async with app.run_test(size=(100, 30)) as pilot:
        scan = await start_held(app, pilot)
        await pilot.press("escape")  # cancel: the scan stops at the engine's next progress report
        release.set()
        await wait_until(pilot, lambda: not scan.is_running)
        await settle(app, pilot)
        assert isinstance(scan.error, ScanCancelled)
        assert app.result is None and app.current_mode == "columns"


# -- the command line -----------------------------------------------------------------------------------------
def test_open_is_a_command_and_demo_without_a_terminal_prints_the_summary(capsys):
    from investigator.cli.main import main

    with pytest.raises(SystemExit) as exc:
        main(["open", "--help"])
    assert exc.value.code == 0
    assert "--exclude" in capsys.readouterr().out


@run_async
async def test_a_bad_option_shows_one_line_in_the_ui(demo):
    app = InvestigatorApp(demo, {"id": DEMO_ID, "cutoff": 2.0}, error_text=flag_message)  # as `investigator open`
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(app, pilot)
        assert "--cutoff must be between 0.5 and 1" in screen_text(app)
        assert app.loaded is None


@run_async
async def test_pattern_column_and_filter_when_the_result_has_groups(demo):
    from types import SimpleNamespace

    from investigator.tui.models.cases import cases_data

    app = demo_app(demo)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        result = app.result
        flagged = np.flatnonzero(result.flagged)
        group = np.full(result.n_records, -1)
        group[flagged[:3]] = 1  # an invented grouping: three flagged records together, the rest alone
        pattern = np.array([None] * result.n_records, dtype=object)
        pattern[flagged] = "isolated"
        pattern[flagged[:3]] = "group"
        result.groups = SimpleNamespace(group=group, pattern=pattern)
        app.cases = cases_data(result)
        await pilot.pause()
        table = app.screen.query_one(CasesTable)
        assert "pattern" in screen_text(app) and "isolated" in screen_text(app)
        await pilot.press("g")  # isolated
        assert sorted(table.order.tolist()) == sorted(flagged[3:].tolist())
        await pilot.press("g")  # in a group
        assert sorted(table.order.tolist()) == sorted(flagged[:3].tolist())


@run_async
async def test_a_group_opens_as_one_case_and_takes_a_verdict(demo):
    app = demo_app(demo)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        grouped = [i for i in table.order.tolist() if app.result.groups.pattern[i] == "group"]
        assert grouped, "the demo's split purchase is a group"
        while table.position != grouped[0]:
            await pilot.press("down")
        await pilot.press("o")
        await settle(app, pilot)
        assert type(app.screen).__name__ == "GroupScreen"
        case = app.screen.case
        text = screen_text(app)
        assert f"Group {case.group}: {case.size} records" in text
        assert case.profile[0].feature in text and str(app.result.keys[grouped[0]]) in text
        await pilot.press("v", "c", *"split purchase", "enter")
        await settle(app, pilot)
        with ReviewStore(default_store_path(demo), create=False) as store:
            entry = store.get(f"group:{case.group}")
        assert entry.verdict == "confirmed" and entry.note == "split purchase" and entry.kind == "group"
        assert "Verdict: confirmed" in screen_text(app)
        await pilot.press("escape")
        await settle(app, pilot)
        assert type(app.screen).__name__ == "CasesScreen"


@run_async
async def test_the_first_run_hint_is_remembered_once_dismissed(demo):
    app = InvestigatorApp(demo, ScanOptions(id=DEMO_ID), autoscan=True)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        assert app.show_hint and "consensus 0-1" in screen_text(app)
        await pilot.press("i")
        await settle(app, pilot)
        assert "consensus 0-1" not in screen_text(app)
    again = InvestigatorApp(demo, ScanOptions(id=DEMO_ID), autoscan=True)
    async with again.run_test(size=(120, 40)) as pilot:
        await settle(again, pilot)
        assert not again.show_hint and "consensus 0-1" not in screen_text(again)


@run_async
async def test_the_map_opens_a_group_as_one_case(demo):
    app = demo_app(demo)
    async with app.run_test(size=(100, 30)) as pilot:
        canvas = await open_map(app, pilot)
        # Flagged records by consensus: the split purchase comes after the keying errors and the dates; a cell of
        # the map can hold several records, so step until the record under the cursor is a group member.
        for _ in range(len(canvas.flag_order)):
            await pilot.press("n")
            chosen = canvas.selected()
            if app.result.groups.pattern[chosen] == "group":
                break
        assert app.result.groups.pattern[chosen] == "group"
        await pilot.press("o")
        await settle(app, pilot)
        assert type(app.screen).__name__ == "GroupScreen"
        assert app.screen.case.group == int(app.result.groups.group[chosen])
