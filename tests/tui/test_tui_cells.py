"""The Record screen shows the cell findings of the record: each finding's sentence above the smallest change,
and a mark on the value in the values table (invented purchase-order lines with planted slips,
fixtures/cells.py)."""

from __future__ import annotations

import pytest

pytest.importorskip("textual")
pytestmark = pytest.mark.slow  # drives the app through a scan

from fixtures.cells import purchase_orders  # noqa: E402
from fixtures.tui import run_async, screen_text, settle, wait_until  # noqa: E402
from investigator.output.explanation import cell_sentence  # noqa: E402
from investigator.pipeline.options import ScanOptions  # noqa: E402
from investigator.tui.app import InvestigatorApp  # noqa: E402
from investigator.tui.widgets.cases_table import CasesTable  # noqa: E402


@run_async
async def test_record_screen_marks_the_cells_that_look_wrong(tmp_path):
    frame, planted = purchase_orders()
    path = tmp_path / "orders.csv"
    frame.to_csv(path, index=False)
    slips = {frame.line[i] for i in planted["x100"] + planted["div10"]}
    app = InvestigatorApp(path, ScanOptions(id="line"), autoscan=True, show_hint=False)
    async with app.run_test(size=(160, 60)) as pilot:
        await settle(app, pilot)
        table = app.screen.query_one(CasesTable)
        # The first flagged record (by consensus) that is one of the power-of-ten slips.
        order = [int(p) for p in table.order]
        target = next(p for p in order if app.result.table.keys[p] in slips)
        while table.position != target:
            await pilot.press("down")
        await pilot.press("enter")
        await wait_until(pilot, lambda: getattr(app.screen, "view", None) is not None
                         and app.screen.view.explanation.row == target + 1)
        e = app.screen.view.explanation
        assert e.cells and e.cells[0].column == "amount", e.cells
        text = " ".join(screen_text(app).split())
        first = " ".join(cell_sentence(e.cells[0]).split())
        assert f"Cell: {first}"[:60] in text  # the sentence, as wrapped on screen, from its start
        assert "wrong? expected ~" in text and e.cells[0].tag in text
