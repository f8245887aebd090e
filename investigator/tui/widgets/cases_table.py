"""A virtualised table of records: it draws only the rows that fit, straight from numpy arrays.

A DataTable with 100k rows builds 100k row objects; here a key press moves an index and redraws about 20
lines, whatever the number of records. Rank and key stay at the left; the other columns (the result's, then
the record's input columns) scroll sideways under a column cursor (left/right), with ‹ and › in the header
where columns are out of view, so no column is ever out of reach.
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
MAX_NOTE = 24  # characters of the note column at most (a longer note ends with an ellipsis)


def _num(x: float) -> str:
    if not np.isfinite(x):
        return "-"
    return f"{x:.4g}" if abs(x) < 1e5 else f"{x:.2e}"


class CasesTable(Widget, can_focus=True):
    """Rows of ``data`` in the order ``order`` (positions); the cursor is an index into ``order``."""

    DEFAULT_CSS = "CasesTable { height: 1fr; }"
    BINDINGS = [
        Binding("up", "move(-1)", "Previous record", show=False),
        Binding("down", "move(1)", "Next record", show=False),
        Binding("k", "move(-1)", "Previous record", show=False),
        Binding("j", "move(1)", "Next record", show=False),
        Binding("pageup", "page(-1)", "A page up", show=False),
        Binding("pagedown", "page(1)", "A page down", show=False),
        Binding("home", "edge(0)", "First record", show=False),
        Binding("end", "edge(1)", "Last record", show=False),
        Binding("enter", "select", "Open"),
        Binding("left", "column(-1)", "Column cursor left (s sorts by its column; the columns scroll sideways)",
                show=False),
        Binding("right", "column(1)", "Column cursor right", show=False),
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

    class ColumnHighlighted(Message):
        """The column cursor moved to the column ``column`` (an id: consensus, a method key, an input column)."""

        def __init__(self, column: str) -> None:
            super().__init__()
            self.column = column

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self.data: CasesData | None = None
        self.order = np.zeros(0, dtype=np.int64)
        self.sort = "consensus"
        self.reverse = False
        self.top = 0
        self.column = "consensus"  # the column cursor: the column s sorts by
        self.left = 0  # the first of the scrolled columns (all but rank and key) in view
        self.shown: list[str] | None = None  # the optional columns shown, in order (None: every one)
        self._note_width: tuple[int, int] | None = None
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

    # -- columns -------------------------------------------------------------------------------------
    def action_column(self, step: int) -> None:
        """Move the column cursor (the highlighted header) one column left or right; the columns scroll sideways
        so that it is always in view."""
        if self.data is None:
            return
        ids = [cid for cid, *_ in self.all_columns()]
        at = ids.index(self.column) if self.column in ids else 0
        self.column = ids[max(0, min(at + step, len(ids) - 1))]
        self.refresh()
        self.post_message(self.ColumnHighlighted(self.column))

    def optional_columns(self) -> list[tuple[str, str]]:
        """(id, header) of every column that can be shown or hidden: the result columns, then the input
        columns (rank and key are always shown)."""
        d = self.data
        if d is None:
            return []
        cols = [("flag", "flag"), ("consensus", "consensus")]
        if d.priority is not None:  # learned from the verdicts; its own column beside the consensus
            cols.append(("priority", "priority"))
        if d.within is not None:  # peer groups: consensus within the record's segment, * when flagged there
            cols.append(("within", "within"))
        cols.append(("votes", "votes"))
        if d.pattern is not None:
            cols.append(("pattern", "pattern"))
        cols.append(("verdict", "verdict"))
        cols += [(m, SHORT.get(m, m[:9])) for m in d.methods]
        cols.append(("note", "note"))
        if d.inputs is not None:
            cols += [(n, n) for n in d.inputs.names]
        return cols

    def all_columns(self) -> list[tuple[str, str, int, bool]]:
        """(id, header, width, right-aligned) of the columns shown, rank and key first."""
        d = self.data
        assert d is not None
        key_w = min(max(4, max((len(k) for k in d.keys[self.order[:200]]), default=3)), 16)
        rank_w = max(5, len(f"{len(d.keys):,}"))  # room for the sort mark: rank▼
        cols = [("rank", "rank", rank_w, True), ("key", "key", key_w, False)]
        optional = dict(self.optional_columns())
        chosen = [c for c in self.shown if c in optional] if self.shown is not None else list(optional)
        for cid in chosen:
            cols.append((cid, optional[cid], *self._width(cid)))
        return cols

    def _width(self, cid: str) -> tuple[int, bool]:
        d = self.data
        assert d is not None
        # Each wide enough for its name and the sort mark (consensus▼).
        fixed = {"flag": (5, False), "consensus": (10, True), "priority": (9, True), "within": (9, True),
                 "votes": (6, True), "pattern": (9, False), "verdict": (9, False)}
        if cid in fixed:
            return fixed[cid]
        if cid in d.scores:
            return 10, True
        if cid == "note":
            if self._note_width is None or self._note_width[0] != id(d.notes):
                longest = max((len(n) for n in d.notes if n), default=0)
                self._note_width = (id(d.notes), max(6, min(MAX_NOTE, longest)))
            return self._note_width[1], False
        assert d.inputs is not None
        return d.inputs.width(cid, d.ranking), d.inputs.numeric[cid]

    def _layout(self, width: int) -> tuple[list, list, bool, bool]:
        """(pinned columns, the scrolled columns in view, columns hidden to the left, to the right); the
        column cursor is always in view."""
        cols = self.all_columns()
        pinned, rest = cols[:2], cols[2:]
        room = width - 2 - sum(w + 1 for _, _, w, _ in pinned)
        ids = [c[0] for c in rest]
        if self.column in ids:
            at = ids.index(self.column)
            self.left = min(self.left, at)
            while self.left < at and sum(w + 1 for _, _, w, _ in rest[self.left:at + 1]) > room:
                self.left += 1
        self.left = max(0, min(self.left, max(0, len(rest) - 1)))
        shown, used = [], 0
        for c in rest[self.left:]:
            if used + c[2] + 1 > room and shown:
                break
            shown.append(c)
            used += c[2] + 1
        return pinned, shown, self.left > 0, self.left + len(shown) < len(rest)

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
        if col == "priority" and d.priority is not None:
            return f"{d.priority[p]:.4f}"
        if col == "within" and d.within is not None and d.within_flagged is not None:
            return f"{d.within[p]:.4f}" + ("*" if d.within_flagged[p] else " ")
        if col == "pattern":
            return str(d.pattern[p])
        if col == "verdict":
            return d.verdicts[p] or "-"
        if col == "note":
            return d.notes[p]
        if col in d.scores:
            return _num(d.scores[col][p]) + ("*" if d.flags[col][p] else " ")  # * = this method flags it
        return d.inputs.text(col, p)

    @staticmethod
    def _fit(text: str, w: int, right: bool) -> str:
        text = printable(text)  # keys and values can hold control codes
        if len(text) > w:
            text = text[:w - 1] + "…" if w > 1 else text[:w]  # cut, and said so
        return (text.rjust(w) if right else text.ljust(w)) + " "

    def render(self) -> Text:
        width = self.size.width
        if self.data is None:
            return Text("No scan yet: press 1 for the columns, then s to scan.", style="dim")
        if not len(self.order):
            return Text("No record matches the filter (press x to clear the filters).", style="dim")
        self._scroll_to_cursor()
        pinned, shown, more_left, more_right = self._layout(width)
        cols = pinned + shown
        out = Text(no_wrap=True, overflow="ellipsis")
        head, span = "  ", None
        for cid, label, w, right in cols:
            mark = ("▲" if self.reverse else "▼") if cid == self.sort else ""
            if cid == self.column:
                span = (len(head), len(head) + w)
            label = printable(label)
            if len(label) + len(mark) > w:  # the sort mark stays; the name ends with an ellipsis
                label = label[:max(0, w - len(mark) - 1)] + "…"
            head += self._fit(label + mark, w, right)
        head = head[:width].ljust(width)
        if more_left:  # columns hidden to the left (left brings them back): in the gap after the key
            at = 2 + sum(w + 1 for _, _, w, _ in pinned) - 1
            head = head[:at] + "‹" + head[at + 1:]
        if more_right:  # and to the right (right reaches them)
            head = head[:width - 1] + "›"
        header = Text(head, style="bold underline")
        if span is not None and span[0] < width:
            header.stylize("reverse" if self.has_focus else "reverse dim", span[0], min(span[1], width))
        out.append_text(header)
        out.append("\n")
        h = self._body_height()
        for i in range(self.top, min(self.top + h, len(self.order))):
            p = int(self.order[i])
            here = i == self.cursor
            line = ("›" if here else " ") + ("•" if p in self.marked else " ")  # not only reverse video
            for cid, _, w, right in cols:
                line += self._fit(self._cell(cid, p), w, right)
            style = "reverse" if here and self.has_focus else "bold" if here else ""
            if self.data.flagged[p] and not here:
                style = "bold"
            out.append(line[:width].ljust(width) + ("\n" if i < self.top + h - 1 else ""), style=style)
        return out

    def on_focus(self) -> None:
        self.refresh()

    def on_blur(self) -> None:
        self.refresh()
