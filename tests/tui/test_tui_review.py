"""The workspace and the review store: one verdict on a marked set of records or on every member of a group
(one history entry each), the store of the same records found by content, a reference (`open --reference`)
and the records that break a --limits limit in the status line. Driven through Textual's pilot on the demo."""

from __future__ import annotations

import pandas as pd
import pytest

pytest.importorskip("textual")
pytestmark = pytest.mark.slow  # the whole module: each test drives the app through a scan of the demo

from fixtures.tui import open_first_group, run_async, screen_text, settle  # noqa: E402
from investigator.io.demo import DEMO_ID, write_demo  # noqa: E402
from investigator.pipeline.options import ScanOptions  # noqa: E402
from investigator.review.matching import record_case  # noqa: E402
from investigator.review.store import ReviewStore, default_store_path  # noqa: E402
from investigator.review.verdicts import record_verdict  # noqa: E402
from investigator.tui.app import InvestigatorApp  # noqa: E402
from investigator.tui.widgets.cases_table import CasesTable  # noqa: E402


@pytest.fixture
def demo(tmp_path):
    return write_demo(tmp_path)


def demo_app(path, **kwargs) -> InvestigatorApp:
    options = kwargs.pop("options", {})
    return InvestigatorApp(path, ScanOptions(id=DEMO_ID, **options), autoscan=True, show_hint=False, **kwargs)


def history(path) -> list:
    with ReviewStore(default_store_path(path), create=False) as store:
        return store.history()


# -- a verdict on a marked set -----------------------------------------------------------------------------------
@run_async
async def test_marked_records_get_one_verdict_each(demo):
    app = demo_app(demo)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        first = table.visible_positions()[:5]
        await pilot.press("space", "space", "down", "space")  # marks the 1st, 2nd and 4th record
        marked = [first[0], first[1], first[3]]
        assert app.screen.marked == set(marked)
        assert table.position == first[4]  # each mark steps to the next record
        text = screen_text(app)
        assert "3 marked (v: a verdict on each, u: unmark)" in " ".join(text.split())  # the status may wrap
        assert text.count("•") == 3
        await pilot.press("v")
        await settle(app, pilot)
        assert "Verdict on each of 3 marked records (one history entry each)" in screen_text(app)
        await pilot.press("b", *"seen at the site", "enter")
        await settle(app, pilot)
        entries = history(demo)
        assert len(entries) == 3  # one history entry per record
        keys = [str(app.result.keys[p]) for p in sorted(marked)]
        assert sorted(e.key for e in entries) == sorted(keys)
        assert {e.verdict for e in entries} == {"benign"} and {e.note for e in entries} == {"seen at the site"}
        assert len({e.change for e in entries}) == 3 and len({e.at for e in entries}) == 1  # one transaction
        assert [app.cases.verdicts[p] for p in marked] == ["benign"] * 3
        assert app.cases.verdicts[first[2]] == ""  # the unmarked one between them is untouched
        assert app.screen.marked == set() and "marked" not in screen_text(app)


@run_async
async def test_marks_toggle_and_clear_and_a_batch_keeps_each_note(demo):
    app = demo_app(demo)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        a, b = table.visible_positions()[:2]
        record_verdict(app.result.table, a, "follow-up", "ask the approver", default_store_path(demo))
        await pilot.press("space", "up", "space")  # marked, then unmarked again
        assert app.screen.marked == set()
        await pilot.press("space", "space", "u")
        assert app.screen.marked == set() and "•" not in screen_text(app)
        await pilot.press("home", "space", "space", "v", "c", "enter")  # the note box left empty
        await settle(app, pilot)
        with ReviewStore(default_store_path(demo), create=False) as store:
            notes = {e.key: e.note for e in store.current()}
        assert notes == {str(app.result.keys[a]): "ask the approver", str(app.result.keys[b]): ""}
        assert len(history(demo)) == 3


@run_async
async def test_escape_in_the_batch_dialog_saves_nothing_and_keeps_the_marks(demo):
    app = demo_app(demo)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        await pilot.press("space", "space", "v", "c", "escape")
        await settle(app, pilot)
        assert not default_store_path(demo).exists()
        assert len(app.screen.marked) == 2


# -- a verdict on every member of a group ----------------------------------------------------------------------
@run_async
async def test_every_member_of_a_group_gets_the_verdict(demo):
    app = demo_app(demo)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        await open_first_group(app, pilot)
        case = app.screen.case
        assert "a: on each member" in screen_text(app)
        await pilot.press("a")
        await settle(app, pilot)
        assert f"Verdict on each of the {case.size} records of group {case.group}" in screen_text(app)
        await pilot.press("c", *"split purchase", "enter")
        await settle(app, pilot)
        entries = history(demo)
        assert len(entries) == case.size  # one entry per member, none for the group case itself
        assert sorted(e.key for e in entries) == sorted(str(k) for k in case.keys)
        assert {(e.kind, e.verdict, e.note) for e in entries} == {("record", "confirmed", "split purchase")}
        # Each entry is the member's own case, as a verdict on it alone would be.
        expected = {record_case(app.result.table, m.row - 1).case_id for m in case.members}
        assert {e.case_id for e in entries} == expected
        # The members list says each member's new verdict and note on its line.
        lines = [line for line in screen_text(app).splitlines() if f"{case.members[0].key} · row " in line]
        assert len(lines) == 1 and "verdict confirmed (split purchase)" in lines[0]


# -- the store of the same records under another name ----------------------------------------------------------
@run_async
async def test_the_xlsx_copy_of_the_demo_sees_the_verdicts_set_on_the_csv(demo):
    frame = pd.read_csv(demo)
    xlsx = demo.with_suffix(".xlsx")
    frame.to_excel(xlsx, index=False)
    app = demo_app(demo)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        await pilot.press("v", "f", *"from the csv", "enter")
        await settle(app, pilot)
        key = str(app.result.keys[app.screen.query_one(CasesTable).position])
    other = demo_app(xlsx)
    said: list[str] = []  # what the app notifies, kept here (a toast goes away after its time)
    notify = other.notify_plain
    other.notify_plain = lambda message, **kwargs: (said.append(message), notify(message, **kwargs))
    async with other.run_test(size=(120, 40)) as pilot:
        await settle(other, pilot)
        assert other.store_path() == default_store_path(demo)
        assert other.loaded.store.how == "content"
        assert any(m.startswith(f"Verdicts from the review store {default_store_path(demo).name}, which holds")
                   for m in said), said
        position = [str(k) for k in other.result.keys].index(key)
        assert other.cases.verdicts[position] == "follow-up" and other.cases.notes[position] == "from the csv"
        await pilot.press("down", "v", "b", "enter")  # a verdict set on the .xlsx goes to the same store
        await settle(other, pilot)
    assert not default_store_path(xlsx).exists()
    assert len(history(demo)) == 2


# -- a reference and the limits -------------------------------------------------------------------------------
@run_async
async def test_open_with_a_reference_scores_against_its_fit(tmp_path, demo):
    frame = pd.read_csv(demo)
    reference, new = tmp_path / "history.csv", tmp_path / "new.csv"
    frame.iloc[:2000].to_csv(reference, index=False)
    frame.iloc[2000:].to_csv(new, index=False)
    app = demo_app(new, reference=reference)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        assert app.result.run.reference is not None and app.result.run.reference.input.rows == 2000
        assert "hotelling" in app.result.method_results and app.result.n_records == 400
        await pilot.press("1")
        await settle(app, pilot)
        assert "Scored against the reference history.csv (2,000 records)" in screen_text(app)
    # The same numbers as `check` gives (one fit for every command).
    import investigator

    checked = investigator.check(new, reference=reference, id=DEMO_ID)
    assert checked.consensus.tolist() == app.result.consensus.tolist()


@run_async
async def test_the_status_line_names_the_records_that_break_a_limit(tmp_path, demo):
    limits = tmp_path / "limits.csv"
    limits.write_text("column,lower,upper\nnights,,9\n", encoding="utf-8")
    frame = pd.read_csv(demo)
    over = frame.loc[frame["nights"] > 9, DEMO_ID].tolist()
    assert len(over) == 1  # the demo's 20 nights typed for 2
    app = demo_app(demo, options={"limits": str(limits)})
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        assert f"out of spec: 1 ({over[0]})" in screen_text(app)
        table = app.screen.query_one(CasesTable)
        while str(app.result.keys[table.position]) != over[0]:
            await pilot.press("down")
        await pilot.pause()
        assert "Out of spec: nights 20 above 9." in screen_text(app)
