"""The members of a group as a list: one line per member record (key, row, rank, flag, verdict); enter opens
the record under the highlight."""

from __future__ import annotations

from textual.binding import Binding
from textual.message import Message
from textual.widgets import OptionList
from textual.widgets.option_list import Option

from investigator.tui.plain import plain


class MemberList(OptionList):
    DEFAULT_CSS = "MemberList { height: 1fr; }"
    BINDINGS = [
        Binding("enter", "select", "Open", tooltip="Open the highlighted member's record"),
        Binding("up", "cursor_up", "Previous member", show=False),
        Binding("down", "cursor_down", "Next member", show=False),
    ]

    class Opened(Message):
        """The member record at ``position`` (0-based) is to be opened."""

        def __init__(self, position: int) -> None:
            super().__init__()
            self.position = position

    def show_members(self, lines: list[tuple[int, str]]) -> None:
        """``lines``: (record position, the line that describes it), in the order shown; the highlight stays
        where it was."""
        at = self.highlighted
        self.clear_options()
        self.add_options([Option(plain(text), id=str(position)) for position, text in lines])
        if lines:
            self.highlighted = min(at or 0, len(lines) - 1)

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        if event.option.id is not None:
            self.post_message(self.Opened(int(event.option.id)))
