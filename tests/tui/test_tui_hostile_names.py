"""The workspace on a file whose names and keys look like Rich markup (``[bold]``, ``[/]``) or hold terminal
control codes, and on a full disk while a verdict is saved.

Rich reads a plain string as markup ("Console Markup" in the Rich documentation: ``[/]`` closes the last
style, and a closing tag with nothing to close is a MarkupError); names must show literally. The full disk
is SQLite's own SQLITE_FULL via ``PRAGMA max_page_count`` (SQLite documentation), as in
tests/review/test_store_full.py.
"""

from __future__ import annotations

import csv
import sqlite3

import numpy as np
import pandas as pd
import pytest

pytest.importorskip("textual")
pytestmark = pytest.mark.slow  # each test drives the app through a scan

from fixtures.tui import run_async, screen_text, settle, wait_until  # noqa: E402
from investigator.pipeline.options import ScanOptions  # noqa: E402
from investigator.review import store as store_module  # noqa: E402
from investigator.review.store import ReviewStore, default_store_path  # noqa: E402
from investigator.tui.app import InvestigatorApp  # noqa: E402

KEY = "[red]K3[/]\x1b[2J"


@pytest.fixture
def hostile(tmp_path):
    rng = np.random.default_rng(1)
    n = 60
    frame = pd.DataFrame({"id": [f"K{i}" for i in range(n)], "[bold]amount": rng.normal(100, 10, n),
                          "price[/]": rng.normal(5, 1, n), "x\x1b[2Jy": rng.normal(0, 1, n),
                          "café": rng.normal(0, 1, n)})
    frame.loc[3, ["[bold]amount", "id"]] = [500.0, KEY]
    path = tmp_path / "h.csv"
    frame.to_csv(path, index=False, quoting=csv.QUOTE_NONNUMERIC)
    return path


@run_async
async def test_markup_and_control_codes_show_literally(hostile):
    app = InvestigatorApp(hostile, ScanOptions(id="id"), autoscan=False)
    async with app.run_test(size=(140, 40)) as pilot:
        await settle(app, pilot)
        await wait_until(pilot, lambda: "café" in screen_text(app))  # the table is drawn on an idle pass
        assert "\x1b" not in screen_text(app)
        # The line under the columns table gives the highlighted column's whole name, literally.
        for name in ("[bold]amount", "price[/]", "x\\x1b[2Jy"):
            await pilot.press("down")
            await wait_until(pilot, lambda name=name: f" {name}: " in screen_text(app))
            assert "\x1b" not in screen_text(app)
        app.start_scan()
        await settle(app, pilot)
        await wait_until(pilot, lambda: "[red]K3" in screen_text(app))
        text = screen_text(app)
        assert "[red]K3[/]\\x1b" in text and "\x1b" not in text
        await pilot.press("enter")  # the record screen of the top record
        await settle(app, pilot)
        await wait_until(pilot, lambda: "Record [red]K3" in screen_text(app))
        text = screen_text(app)
        assert "Record [red]K3[/]\\x1b[2J" in text and "[bold]amount" in text and "\x1b" not in text


@run_async
async def test_a_full_disk_while_saving_a_verdict_shows_one_line(hostile, monkeypatch):
    store = default_store_path(hostile)
    with ReviewStore(store) as review:  # an earlier verdict that must survive
        review.set(store_module.group_case("group:9"), "benign", "kept")
    app = InvestigatorApp(hostile, ScanOptions(id="id"), autoscan=True)
    async with app.run_test(size=(140, 40)) as pilot:
        await settle(app, pilot)
        real = sqlite3.connect

        def connect(*args, **kwargs):
            db = real(*args, **kwargs)
            db.execute(f"PRAGMA max_page_count = {db.execute('PRAGMA page_count').fetchone()[0]}")
            return db

        monkeypatch.setattr(store_module.sqlite3, "connect", connect)
        app.save_verdict(0, "confirmed", "n" * 6000)  # what the verdict dialog calls; the note needs a new page
        await settle(app, pilot)
        shown = [n.message for n in app._notifications]
        assert any("Verdict not saved" in m and "is full" in m for m in shown), shown
    monkeypatch.setattr(store_module.sqlite3, "connect", real)
    with ReviewStore(store, create=False) as review:
        assert [(e.case_id, e.note) for e in review.history()] == [("group:9", "kept")]
