"""The verdict modal: a letter picks the state, then type the note; enter saves once a state is chosen.

An unreviewed record starts with no state chosen, so enter alone never records a verdict nobody picked; a
record with a verdict starts at it (enter then keeps it, with the note as edited)."""

from __future__ import annotations

from textual import events
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widget import Widget
from textual.widgets import Input, Label, Static

from investigator.tui.plain import plain

LETTERS = {"o": "open", "c": "confirmed", "b": "benign", "f": "follow-up"}
# The dialog's keys that its state picker reads itself (not bindings), as the help lists them.
PICKER_KEYS = [*(Binding(k, f"pick('{s}')", f"State: {s}") for k, s in LETTERS.items()),
               Binding("left,right", "step", "State: the previous / next"),
               Binding("enter", "save", "Save (once a state is chosen)")]


class StatePicker(Widget, can_focus=True):
    """The four states in one line; the chosen one has (x), the others ( )."""

    DEFAULT_CSS = "StatePicker { height: 1; }"

    def __init__(self, state: str | None, **kwargs) -> None:
        super().__init__(**kwargs)
        self.state = state  # None: none chosen yet

    def render(self) -> str:
        return "   ".join(f"{'(x)' if s == self.state else '( )'} [{k}] {s}" for k, s in LETTERS.items())

    def on_key(self, event: events.Key) -> None:
        key = (event.character or "").lower()
        if key in LETTERS:
            self.state = LETTERS[key]
            self.refresh()
            event.stop()
            self.screen.query_one("#verdict-note", Input).focus()
        elif event.key in ("left", "right"):
            states = list(LETTERS.values())
            step = 1 if event.key == "right" else -1
            at = states.index(self.state) if self.state is not None else (-1 if step == 1 else 0)
            self.state = states[(at + step) % len(states)]
            self.refresh()
            event.stop()
        elif event.key == "enter":
            event.stop()
            self.screen.save()


class VerdictScreen(ModalScreen[tuple[str, str] | None]):
    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(self, key: str, row: int | None, verdict: str | None, note: str | None, *,
                 several: bool = False, **kwargs) -> None:
        """``several``: ``key`` names a set of records ("3 marked records"), each of which gets the verdict."""
        super().__init__(**kwargs)
        self.key, self.row, self.verdict, self.note, self.several = key, row, verdict, note, several

    def compose(self) -> ComposeResult:
        with Vertical(id="verdict-box"):
            what = f"record {self.key} (row {self.row})" if self.row is not None else self.key
            if self.several:
                yield Label(plain(f"Verdict on each of {what} (one history entry each)"))
            else:
                yield Label(plain(f"Verdict on {what}; now: {self.verdict or 'none'}"))
            yield StatePicker(self.verdict, id="verdict-state")
            hint = "note (optional; left empty, each keeps its own note)" if self.several else "note (optional)"
            yield Input(value=self.note or "", placeholder=hint, id="verdict-note")
            yield Static("letter: state · type the note · enter saves · esc cancels", classes="dim",
                         id="verdict-hint")

    def on_mount(self) -> None:
        self.query_one(StatePicker).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.save()

    def save(self) -> None:
        # The note box starts with the current note, so saving without touching it keeps the note.
        picker = self.query_one(StatePicker)
        if picker.state is None:
            self.query_one("#verdict-hint", Static).update("choose a state first: o open, c confirmed, b benign, "
                                                           "f follow-up (esc cancels)")
            picker.focus()
            return
        self.dismiss((picker.state, self.query_one("#verdict-note", Input).value))

    def action_cancel(self) -> None:
        self.dismiss(None)
