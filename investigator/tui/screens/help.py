"""Help: every key of every screen, and what the three first numbers mean."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from investigator.tui.screens.cases import HINT


def _keys(bindings) -> list[tuple[str, str]]:
    out = []
    for b in bindings:
        b = b if isinstance(b, Binding) else Binding(*b)
        if b.description:
            out.append((b.key.replace("question_mark", "?").replace("slash", "/"), b.description))
    return out


def help_text(sections: dict[str, list]) -> str:
    lines = []
    for title, bindings in sections.items():
        lines.append(title)
        lines += [f"  {k:<12} {d}" for k, d in _keys(bindings)]
        lines.append("")
    lines += ["The first three numbers", *(f"  {part.strip()}" for part in HINT.split(" · ")[:3])]
    return "\n".join(lines)


class HelpScreen(ModalScreen[None]):
    BINDINGS = [Binding("escape", "close", "Close"), Binding("question_mark", "close", "Close"),
                Binding("q", "close", show=False)]

    def __init__(self, sections: dict[str, list], **kwargs) -> None:
        super().__init__(**kwargs)
        self.sections = sections

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help-box"):
            yield Static("Keys (esc closes)\n", classes="section")
            yield Static(help_text(self.sections), id="help-text")

    def action_close(self) -> None:
        self.dismiss(None)
