"""Help: every key of every screen, and what the three first numbers mean.

The footers show the keys used most (grouped, to fit 80 columns); this lists every key with its whole
description, the ones the footers leave out too."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from investigator.tui.keys import from_dialog
from investigator.tui.screens.cases import HINT

# How a key is written in the help (Textual's names on the left).
KEY_NAMES = {"question_mark": "?", "slash": "/", "escape": "esc", "up": "↑", "down": "↓", "left": "←",
             "right": "→", "pageup": "pgup", "pagedown": "pgdn", "ctrl+p": "ctrl+p"}


def key_name(key: str) -> str:
    return ", ".join(KEY_NAMES.get(k.strip(), k.strip()) for k in key.split(","))


def describe(binding: Binding) -> str:
    """What the help says a binding does."""
    return binding.tooltip or binding.description or binding.action


def help_entries(sections: dict[str, list]) -> list[tuple[str, str, str]]:
    """(section, keys, description) for every binding: the keys of one description in one section together
    ("↑ / k  Previous record"). The description is the binding's tooltip where it has one: the footer shows a
    short word ("Group"), the help says what it does."""
    out: list[tuple[str, str, str]] = []
    for title, bindings in sections.items():
        keys: dict[str, list[str]] = {}
        for b in bindings:
            b = b if isinstance(b, Binding) else Binding(*b)
            keys.setdefault(describe(b), []).append(key_name(b.key))
        out += [(title, " / ".join(dict.fromkeys(k)), description) for description, k in keys.items()]
    return out


def help_text(sections: dict[str, list]) -> str:
    lines: list[str] = []
    entries = help_entries(sections)
    for title in sections:
        lines.append(title)
        lines += [f"  {k:<12} {d}" for t, k, d in entries if t == title]
        lines.append("")
    lines += ["The first three numbers", *(f"  {part.strip()}" for part in HINT.split(" · ")[:3])]
    return "\n".join(lines)


class HelpScreen(ModalScreen[None]):
    BINDINGS = [Binding("escape", "close", "Close"), Binding("question_mark", "close", "Close"),
                Binding("q", "close", "Close", show=False), *from_dialog()]

    def __init__(self, sections: dict[str, list], **kwargs) -> None:
        super().__init__(**kwargs)
        self.sections = sections

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help-box"):
            yield Static("Keys (esc closes; ↓ and pgdn scroll)\n", classes="section")
            yield Static(help_text(self.sections), id="help-text")

    def action_close(self) -> None:
        self.dismiss(None)
