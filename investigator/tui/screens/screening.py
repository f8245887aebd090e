"""Screens: the trade's screens of the last scan (Benford's law, round amounts, thresholds, the last two
digits, duplicates) with the records each lists."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from investigator.tui.keys import from_dialog
from investigator.tui.models.screens import screens_text
from investigator.tui.plain import plain


class ScreensScreen(ModalScreen[None]):
    BINDINGS = [Binding("escape", "close", "Close"), Binding("t", "close", "Close", show=False),
                Binding("q", "close", "Close", show=False), *from_dialog()]

    def __init__(self, screens: dict | None, **kwargs) -> None:
        super().__init__(**kwargs)
        self.screens = screens

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="screens-box"):
            yield Static("Screens (esc closes): leads for a person to review, not findings\n", classes="section")
            yield Static(plain(screens_text(self.screens)), id="screens-text")

    def action_close(self) -> None:
        self.dismiss(None)
