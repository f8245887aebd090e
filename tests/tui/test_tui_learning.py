"""The priority learned from verdicts in the workspace (docs/learning.md), on the demo data: Cases sorted by
the review order when the store holds verdicts, `p` back to the consensus order, the priority relearned in a
worker after a verdict, the Record screen saying why a record moved, and ``learn=False`` (``--no-learn``)."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("textual")
pytestmark = pytest.mark.slow  # the whole module: each test drives the app through a scan of the demo

from fixtures.tui import run_async, screen_text, settle  # noqa: E402
from investigator.io.demo import DEMO_ID, write_demo  # noqa: E402
from investigator.io.tables import load_table  # noqa: E402
from investigator.pipeline.options import ScanOptions  # noqa: E402
from investigator.review.store import default_store_path  # noqa: E402
from investigator.review.verdicts import record_verdict  # noqa: E402
from investigator.tui.app import InvestigatorApp  # noqa: E402
from investigator.tui.widgets.cases_table import CasesTable  # noqa: E402


@pytest.fixture
def demo(tmp_path):
    return write_demo(tmp_path)


def reviewed_demo(path, states: list[str]) -> list[int]:
    """Verdicts on the records of the demo at the top of the consensus order: one state each."""
    from investigator import scan

    result = scan(path, id=DEMO_ID)
    table = load_table(path, id_column=DEMO_ID)
    positions = [int(i) for i in result.ranking()[:len(states)]]
    for position, state in zip(positions, states, strict=True):
        record_verdict(table, position, state, None, default_store_path(path))
    return positions


def demo_app(path, **kwargs) -> InvestigatorApp:
    return InvestigatorApp(path, ScanOptions(id=DEMO_ID), autoscan=True, show_hint=False, **kwargs)


@run_async
async def test_open_sorts_by_the_review_order_and_p_goes_back_to_consensus(demo):
    reviewed_demo(demo, ["benign", "benign", "confirmed"])
    app = demo_app(demo)
    async with app.run_test(size=(140, 40)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        learned = app.result.learning
        assert learned is not None
        todo = np.flatnonzero(learned.review_order > 0)
        by_review = todo[np.argsort(learned.review_order[todo])]
        assert table.order[:len(todo)].tolist() == by_review.tolist()  # the reviewed ones after
        text = screen_text(app)
        assert "priority" in text and "p: consensus order" in text
        await pilot.press("p")
        await settle(app, pilot)
        assert table.order.tolist() == app.cases.ranking.tolist()
        assert "p: review order" in screen_text(app)
        await pilot.press("p")
        await settle(app, pilot)
        assert table.order[:len(todo)].tolist() == by_review.tolist()


@run_async
async def test_a_verdict_relearns_the_priority_in_a_worker_and_the_record_says_why(demo):
    reviewed_demo(demo, ["benign"])
    app = demo_app(demo)
    async with app.run_test(size=(140, 40)) as pilot:
        await settle(app, pilot)
        before = app.result.learning
        assert before is not None and app.result.run.learning["verdicts"] == 1
        table = app.screen.query_one(CasesTable)
        position = table.position
        await pilot.press("v", "b", "enter")  # the first record of the review order is benign too
        await settle(app, pilot)
        after = app.result.learning
        assert after is not before and app.result.run.learning["verdicts"] == 2
        assert after.review_order[position] == 0  # reviewed now
        assert after.evidence is before.evidence  # the scan's evidence is reused, not rebuilt
        assert np.array_equal(app.cases.priority, after.priority)
        assert table.position == position  # the cursor stays on the record just decided
        await pilot.press("enter")
        await settle(app, pilot)
        assert "reviewed; " in " ".join(screen_text(app).split())
        await pilot.press("escape", "home", "enter")  # the record now first in the review order
        await settle(app, pilot)
        p = app.screen.position
        head = " ".join(screen_text(app).split())  # the head line wraps at the screen's width
        assert after.review_order[p] == 1
        assert "priority" in head and "next to review: 1;" in head and after.reason_of(p)[:12] in head


@run_async
async def test_learn_false_keeps_the_consensus_order(demo):
    reviewed_demo(demo, ["benign", "confirmed"])
    app = demo_app(demo, learn=False)
    async with app.run_test(size=(140, 40)) as pilot:
        await settle(app, pilot)
        assert app.result.learning is None and app.cases.priority is None
        table = app.screen.query_one(CasesTable)
        assert table.order.tolist() == app.cases.ranking.tolist()
        assert "priority" not in screen_text(app)
        await pilot.press("v", "b", "enter")
        await settle(app, pilot)
        assert app.result.learning is None
