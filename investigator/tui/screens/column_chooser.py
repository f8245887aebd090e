"""The column chooser of Cases: which result columns and which of the record's input columns the list shows."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import SelectionList, Static
from textual.widgets.selection_list import Selection

from investigator.tui.plain import plain


class ColumnChooser(ModalScreen[list[str] | None]):
    """``columns``: (id, header) of every optional column, the result's first; ``inputs``: the ids that are
    input columns; ``shown``: the ids shown now, in their order (None: all). Dismissed with the ids to show,
    in order (result columns in their fixed order, then the input columns: those shown before in their order,
    then the newly chosen in file order), or None when cancelled."""

    BINDINGS = [
        Binding("enter", "apply", "Show the ticked columns", priority=True),
        Binding("escape", "cancel", "Cancel"),
        Binding("a", "every", "Tick every column"),
        Binding("n", "no_inputs", "Untick the input columns"),
    ]

    def __init__(self, columns: list[tuple[str, str]], inputs: set[str], shown: list[str] | None, **kwargs) -> None:
        super().__init__(**kwargs)
        self.columns = columns
        self.inputs = inputs
        self.shown = shown if shown is not None else [c for c, _ in columns]

    def compose(self) -> ComposeResult:
        with Vertical(id="chooser-box"):
            yield Static("Columns of the list: space ticks, enter shows them, esc cancels; a: all, n: no input "
                         "columns. Rank and key are always shown.", classes="section")
            yield SelectionList[str](*(
                Selection(plain(f"{'input ' if cid in self.inputs else 'result'}  {header}"), cid, cid in self.shown)
                for cid, header in self.columns), id="chooser-list")

    def on_mount(self) -> None:
        self.query_one(SelectionList).focus()

    def chosen(self) -> list[str]:
        ticked = set(self.query_one(SelectionList).selected)
        results = [c for c, _ in self.columns if c not in self.inputs and c in ticked]
        kept = [c for c in self.shown if c in self.inputs and c in ticked]
        added = [c for c, _ in self.columns if c in self.inputs and c in ticked and c not in kept]
        return results + kept + added

    def action_apply(self) -> None:
        self.dismiss(self.chosen())

    def action_cancel(self) -> None:
        self.dismiss(None)

    def action_every(self) -> None:
        self.query_one(SelectionList).select_all()

    def action_no_inputs(self) -> None:
        selection = self.query_one(SelectionList)
        for cid in self.inputs:
            selection.deselect(cid)
