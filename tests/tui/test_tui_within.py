"""The workspace with peer groups (``within``): the Cases list's within column and the Record screen's sentence."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

pytest.importorskip("textual")
pytestmark = pytest.mark.slow  # drives the app through a scan with one scan per segment

from fixtures.tui import run_async, screen_text, settle, wait_until  # noqa: E402
from investigator.output.explanation import within_sentence  # noqa: E402
from investigator.pipeline.options import ScanOptions  # noqa: E402
from investigator.tui.app import InvestigatorApp  # noqa: E402
from investigator.tui.widgets.cases_table import CasesTable  # noqa: E402


@pytest.fixture
def jobs(tmp_path):
    """Invented repair jobs of two workshops, costs around 100 and 1,000; one north job at 1,000."""
    rng = np.random.default_rng(5)
    frame = pd.concat([pd.DataFrame({"site": site, "hours": rng.integers(1, 9, 300),
                                     "cost": np.round(rng.lognormal(np.log(centre), 0.3, 300), 2)})
                       for site, centre in (("north", 100), ("south", 1000))], ignore_index=True)
    frame.loc[0, "cost"] = 1000.0
    path = tmp_path / "jobs.csv"
    frame.to_csv(path, index=False)
    return path


@run_async
async def test_cases_show_the_within_consensus_and_the_record_its_sentence(jobs):
    app = InvestigatorApp(jobs, ScanOptions(within="site"), autoscan=True, show_hint=False)
    async with app.run_test(size=(140, 40)) as pilot:
        await settle(app, pilot)
        w = app.result.within
        assert w is not None and w.flagged[0]
        table = app.screen.query_one(CasesTable)
        header, row = table.render().plain.splitlines()[:2]
        assert [h.rstrip("▼▲") for h in header.split()[:6]] == ["rank", "key", "flag", "consensus", "within", "votes"]
        first = table.visible_positions()[0]
        assert f"{w.consensus[first]:.4f}" in row and f"{w.consensus[first]:.4f}" in screen_text(app)
        table.cursor = int(np.flatnonzero(table.order == 0)[0])
        await pilot.press("enter")
        await wait_until(pilot, lambda: getattr(app.screen, "view", None) is not None)
        expected = within_sentence(app.result.explain(row=1).within)
        assert expected.startswith("Within its segment (site = north, 300 records): unusual for site = north")
        assert app.screen.query_one("#record-within").render().plain == expected
