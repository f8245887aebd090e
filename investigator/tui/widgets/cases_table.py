"""A virtualised table of records: it draws only the rows that fit, straight from numpy arrays.

A DataTable with 100k rows builds 100k row objects; here a key press moves an index and redraws about 20
lines, whatever the number of records.
"""

from __future__ import annotations

import numpy as np
from rich.text import Text
from textual.binding import Binding
from textual.events import Click, MouseScrollDown, MouseScrollUp
from textual.message import Message
from textual.reactive import reactive
from textual.widget import Widget

from investigator.printable import printable
from investigator.tui.models.cases import CasesData

SHORT = {"robust_distance": "robust", "local_density": "density", "isolation": "isolation",
         "neighbor_distance": "k-dist"}


def _num(x: float) -> str:
    if not np.isfinite(x):
        return "-"
    return f"{x:.4g}" if abs(x) < 1e5 else f"{x:.2e}"


class CasesTable(Widget, can_focus=True):
    """Rows of ``data`` in the order ``order`` (positions); the cursor is an index into ``order``."""

    DEFAULT_CSS = "CasesTable { height: 1fr; }"
    BINDINGS = [
        Binding("up", "move(-1)", "Up", show=False),
        Binding("down", "move(1)", "Down", show=False),
        Binding("k", "move(-1)", show=False),
        Binding("j", "move(1)", show=False),
        Binding("pageup", "page(-1)", show=False),
        Binding("pagedown", "page(1)", show=False),
        Binding("home", "edge(0)", show=False),
        Binding("end", "edge(1)", show=False),
        Binding("enter", "select", "Open record"),
    ]
    cursor: reactive[int] = reactive(0, always_update=True)

    class Highlighted(Message):
        def __init__(self, position: int | None) -> None:
            super().__init__()
            self.position = position

    class Selected(Message):
        def __init__(self, position: int) -> None:
            super().__init__()
            self.position = position

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self.data: CasesData | None = None
        self.order = np.zeros(0, dtype=np.int64)
        self.sort = "consensus"
        self.reverse = False
        self.top = 0
        self.marked: set[int] = set()  # positions marked on the Cases screen, drawn with a bullet

    # -- data ----------------------------------------------------------------------------------------
    def set_rows(self, data: CasesData, order: np.ndarray, sort: str, reverse: bool,
                 keep: int | None = None) -> None:
        """Show ``order``; the cursor stays on record ``keep`` when it is still shown, else goes to the top."""
        self.data, self.order, self.sort, self.reverse = data, order, sort, reverse
        where = np.flatnonzero(order == keep) if keep is not None and len(order) else []
        self.top = 0
        self.cursor = int(where[0]) if len(where) else 0

    @property
    def position(self) -> int | None:
        """0-based record position under the cursor."""
        return int(self.order[self.cursor]) if len(self.order) else None

    def visible_positions(self) -> list[int]:
        """The record positions drawn now, top to bottom (tests and the benchmark read it)."""
        self._scroll_to_cursor()
        return [int(p) for p in self.order[self.top:self.top + self._body_height()]]

    # -- movement ------------------------------------------------------------------------------------
    def _body_height(self) -> int:
        return max(1, self.size.height - 1)

    def _scroll_to_cursor(self) -> None:
        h = self._body_height()
        if self.cursor < self.top:
            self.top = self.cursor
        elif self.cursor >= self.top + h:
            self.top = self.cursor - h + 1
        self.top = max(0, min(self.top, max(0, len(self.order) - h)))

    def watch_cursor(self, value: int) -> None:
        n = len(self.order)
        if n and not 0 <= value < n:
            self.cursor = max(0, min(value, n - 1))
            return
        self._scroll_to_cursor()
        self.refresh()
        self.post_message(self.Highlighted(self.position))

    def action_move(self, step: int) -> None:
        self.cursor = max(0, min(self.cursor + step, len(self.order) - 1))

    def action_page(self, direction: int) -> None:
        self.action_move(direction * self._body_height())

    def action_edge(self, end: int) -> None:
        self.cursor = max(0, len(self.order) - 1) if end else 0

    def action_select(self) -> None:
        if self.position is not None:
            self.post_message(self.Selected(self.position))

    def on_click(self, event: Click) -> None:
        if event.y >= 1 and self.top + event.y - 1 < len(self.order):
            self.cursor = self.top + event.y - 1
            if event.chain == 2:
                self.action_select()

    def on_mouse_scroll_down(self, event: MouseScrollDown) -> None:
        self.action_move(3)

    def on_mouse_scroll_up(self, event: MouseScrollUp) -> None:
        self.action_move(-3)

    # -- drawing -------------------------------------------------------------------------------------
    def _columns(self, width: int) -> list[tuple[str, str, int]]:
        """(id, header, width) of the columns that fit; the note takes what is left."""
        d = self.data
        key_w = min(max(3, max((len(k) for k in d.keys[self.order[:200]]), default=3)), 16)
        rank_w = max(4, len(f"{len(d.keys):,}"))
        cols = [("rank", "rank", rank_w), ("key", "key", key_w), ("flag", "flag", 4), ("consensus", "consensus", 9)]
        if d.within is not None:  # peer groups: consensus within the record's segment, * when flagged there
            cols.append(("within", "within", 9))
        cols.append(("votes", "votes", 5))
        if d.pattern is not None:
            cols.append(("pattern", "pattern", 9))
        cols.append(("verdict", "verdict", 9))
        used = 2 + sum(w + 1 for _, _, w in cols)
        for m in d.methods:
            if used + 11 > width:
                break
            cols.append((m, SHORT.get(m, m[:9]), 10))
            used += 11
        if width - used >= 6:
            cols.append(("note", "note", width - used))
        return cols

    def _cell(self, col: str, p: int) -> str:
        d = self.data
        if col == "key":
            return d.keys[p]
        if col == "rank":
            return f"{d.rank[p]:,}"
        if col == "flag":
            return "FLAG" if d.flagged[p] else ""
        if col == "consensus":
            return f"{d.consensus[p]:.4f}"
        if col == "votes":
            return f"{d.votes[p]}/{len(d.methods)}"
        if col == "within" and d.within is not None and d.within_flagged is not None:
            return f"{d.within[p]:.4f}" + ("*" if d.within_flagged[p] else " ")
        if col == "pattern":
            return str(d.pattern[p])
        if col == "verdict":
            return d.verdicts[p] or "-"
        if col == "note":
            return d.notes[p]
        return _num(d.scores[col][p]) + ("*" if d.flags[col][p] else " ")  # * = this method flags it

    def render(self) -> Text:
        width = self.size.width
        if self.data is None:
            return Text("No scan yet: press 1 for the columns, then s to scan.", style="dim")
        if not len(self.order):
            return Text("No record matches the filter (press x to clear the filters).", style="dim")
        self._scroll_to_cursor()
        cols = self._columns(width)
        out = Text(no_wrap=True, overflow="ellipsis")
        head = "  "
        for cid, label, w in cols:
            mark = ("▲" if self.reverse else "▼") if cid == self.sort else ""
            text = (label + mark)[:w]
            head += (text.rjust(w) if cid in self.data.scores or cid in ("rank", "consensus", "within", "votes")
                     else text.ljust(w)) + " "
        out.append(head[:width].ljust(width) + "\n", style="bold underline")
        h = self._body_height()
        for i in range(self.top, min(self.top + h, len(self.order))):
            p = int(self.order[i])
            here = i == self.cursor
            line = ("›" if here else " ") + ("•" if p in self.marked else " ")  # not only reverse video
            for cid, _, w in cols:
                text = printable(self._cell(cid, p))[:w]  # keys can hold control codes
                line += (text.rjust(w) if cid in self.data.scores or cid in ("rank", "consensus", "within", "votes")
                         else text.ljust(w)) + " "
            style = "reverse" if here and self.has_focus else "bold" if here else ""
            if self.data.flagged[p] and not here:
                style = "bold"
            out.append(line[:width].ljust(width) + ("\n" if i < self.top + h - 1 else ""), style=style)
        return out

    def on_focus(self) -> None:
        self.refresh()

    def on_blur(self) -> None:
        self.refresh()
