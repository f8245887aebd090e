"""The trade's screens in the workspace: the Screens view (t on Cases) and the Cases detail line naming the
amount screens that list the highlighted record. The text model is checked on screens computed directly;
the view is driven through Textual's pilot on the invented demo claims."""

from __future__ import annotations

import numpy as np
import pytest

from investigator.checks.round_amounts import round_amounts
from investigator.checks.thresholds import threshold_test
from investigator.tui.models.screens import NONE, screen_marks, screens_text


def invented_screens() -> dict:
    x = np.concatenate([np.arange(1, 351), [200.0] * 4, [4990.0, 4995.0, 5100.0]])
    keys = [f"Q{i}" for i in range(len(x))]
    return {"round_amounts": {"fee": round_amounts(x, name="fee", keys=keys).as_dict()},
            "thresholds": [threshold_test(x, 5000, name="fee", keys=keys).as_dict()]}


def test_the_screens_text_names_each_screen_and_its_records():
    text = screens_text(invented_screens())
    # By hand: 100, 200 x 5, 300 and 5,100 end in 00: 8 of the 357 whole-unit amounts.
    assert "Round amounts, fee: 8 of 357 whole-unit amounts end in 00" in text
    assert "records: Q99 (100), Q199 (200), Q299 (300), Q350 (200)" in text
    assert "Just below fee 5,000: 2 records from 4,750 to under 5,000 against 1 from 5,000" in text
    assert "records: Q354 (4,990), Q355 (4,995)" in text
    assert "A round amount is a lead, not a finding" in text
    assert screens_text(None) == NONE and screens_text({}) == NONE


def test_marks_by_position():
    marks = screen_marks(invented_screens())
    assert marks[99] == ["round amount (fee)"]
    assert marks[354] == ["just below fee 5,000"]
    assert 0 not in marks and screen_marks(None) == {}


# -- driven through the pilot -------------------------------------------------------------------------------------

@pytest.mark.slow
def test_the_screens_view_and_the_detail_line(tmp_path):
    pytest.importorskip("textual")
    from fixtures.tui import run_async, screen_text, settle
    from investigator.io.demo import DEMO_ID, write_demo
    from investigator.pipeline.options import ScanOptions
    from investigator.tui.app import InvestigatorApp
    from investigator.tui.screens.screening import ScreensScreen
    from investigator.tui.widgets.cases_table import CasesTable

    options = ScanOptions(id=DEMO_ID, threshold="amount=500", digits="amount", methods="isolation")
    app = InvestigatorApp(write_demo(tmp_path), options, autoscan=True, show_hint=False)

    @run_async
    async def drive():
        async with app.run_test(size=(120, 40)) as pilot:
            await settle(app, pilot)
            assert "t: screens" in screen_text(app)
            limit = app.result.run.screens["thresholds"][0]
            first = limit["records"][0]
            await pilot.press("slash", *first["key"], "enter")  # the Cases search, on the listed record's key
            table = app.screen.query_one(CasesTable)
            assert int(table.position) == first["position"]
            assert "Screens: just below amount 500" in screen_text(app)
            await pilot.press("t")
            assert isinstance(app.screen, ScreensScreen)
            shown = screen_text(app)
            assert "Just below amount 500:" in shown and "Benford first digit, amount" in shown
            assert "Last two digits, amount" in shown and first["key"] in shown
            await pilot.press("escape")
            assert not isinstance(app.screen, ScreensScreen)

    drive()
