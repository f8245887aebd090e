"""The keys of the three screens (1 Columns, 2 Cases, 3 Map), shared by the app and the dialogs that lead
somewhere else (help, screens): a modal dialog does not pass keys on to the app, so they declare them too."""

from __future__ import annotations

from textual.binding import Binding

SCREENS = Binding.Group("Screens")  # one hint in the footer: "1 2 3 Screens"; the help names each
SCREEN_KEYS = [
    Binding("1", "show('columns')", "Columns", group=SCREENS),
    Binding("2", "show('cases')", "Cases", group=SCREENS),
    Binding("3", "show('map')", "Map", group=SCREENS),
]


def from_dialog() -> list[Binding]:
    """The same keys in a dialog: the app's action, not shown in a footer (a dialog has none)."""
    return [Binding(b.key, f"app.{b.action}", b.description, show=False) for b in SCREEN_KEYS]
