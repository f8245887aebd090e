"""The map drawn in braille: 2 x 4 dots per character cell.

Ordinary records are faint braille dots; a cell holding a flagged record shows a symbol instead (◆ for an
isolated flag, the group's digit for a flag in a group), so flags read without colour. The cursor is a cell;
the selected record is the one nearest to it, drawn as ◉ (bold, reverse video) where it is, on a crosshair
(─ and │ through the empty cells of its row and column), so it cannot be missed even without colour; the
cursor cell itself is + in reverse video when the record nearest to it is in another cell.
"""

from __future__ import annotations

import numpy as np
from rich.text import Text
from textual.binding import Binding
from textual.message import Message
from textual.reactive import reactive
from textual.widget import Widget

BRAILLE = 0x2800
# Dot bits of a braille cell by (column, row) within the 2 x 4 grid (Unicode braille patterns).
DOT = np.array([[0x01, 0x02, 0x04, 0x40], [0x08, 0x10, 0x20, 0x80]])
FLAGGED = Binding.Group("Flagged")


class MapCanvas(Widget, can_focus=True):
    DEFAULT_CSS = "MapCanvas { height: 1fr; }"
    BINDINGS = [
        Binding("left", "nudge(-1, 0)", "Move the cursor", show=False),
        Binding("right", "nudge(1, 0)", "Move the cursor", show=False),
        Binding("up", "nudge(0, -1)", "Move the cursor", show=False),
        Binding("down", "nudge(0, 1)", "Move the cursor", show=False),
        Binding("n", "next_flag(1)", "Next flagged", group=FLAGGED),
        Binding("p", "next_flag(-1)", "Previous flagged", group=FLAGGED),
        Binding("enter", "open", "Open"),
    ]
    cursor: reactive[tuple[int, int]] = reactive((0, 0), always_update=True)

    class Opened(Message):
        def __init__(self, position: int) -> None:
            super().__init__()
            self.position = position

    class Moved(Message):
        def __init__(self, position: int | None) -> None:
            super().__init__()
            self.position = position

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self.coords: np.ndarray | None = None
        self.flagged: np.ndarray | None = None
        self.labels: np.ndarray | None = None
        self.flag_order: np.ndarray = np.zeros(0, dtype=int)
        self._flag_i = -1
        self._stepped: int | None = None  # the record the last step to a flagged record chose
        self._cells: np.ndarray | None = None  # per record: (cell x, cell y, dot x, dot y)
        self._drawn_size = (0, 0)

    def set_points(self, coords: np.ndarray, flagged: np.ndarray, labels: np.ndarray | None,
                   ranking: np.ndarray) -> None:
        self.coords, self.flagged, self.labels = coords, flagged, labels
        self.flag_order = ranking[flagged[ranking]]  # flagged records, highest consensus first
        self._cells = None
        self.refresh()

    # -- geometry ------------------------------------------------------------------------------------
    def cells(self) -> np.ndarray:
        """Per record: cell column, cell row, dot column, dot row at the current size."""
        w, h = max(1, self.size.width), max(1, self.size.height)
        if self._cells is None or self._drawn_size != (w, h):
            c = self.coords
            lo, hi = np.nanmin(c, axis=0), np.nanmax(c, axis=0)
            span = np.where(hi > lo, hi - lo, 1.0)
            dx = np.clip(((c[:, 0] - lo[0]) / span[0] * (2 * w - 1)).round(), 0, 2 * w - 1).astype(int)
            dy = np.clip(((hi[1] - c[:, 1]) / span[1] * (4 * h - 1)).round(), 0, 4 * h - 1).astype(int)
            self._cells = np.column_stack([dx // 2, dy // 4, dx % 2, dy % 4])
            self._drawn_size = (w, h)
        return self._cells

    def selected(self) -> int | None:
        """The record nearest to the cursor cell (flagged records win ties); after a step to the next flagged
        record, that record while the cursor stays on its cell (a cell can hold several records)."""
        if self.coords is None or not len(self.coords):
            return None
        if self._stepped is not None and self.cell_of(self._stepped) == tuple(self.cursor):
            return self._stepped
        cells = self.cells()
        cx, cy = self.cursor
        d = (cells[:, 0] - cx) ** 2 + (2 * (cells[:, 1] - cy)) ** 2  # a cell is about twice as tall as wide
        d = d * 2 - self.flagged.astype(int)
        return int(np.argmin(d))

    def cell_of(self, position: int) -> tuple[int, int]:
        x, y, _, _ = self.cells()[position]
        return int(x), int(y)

    # -- actions -------------------------------------------------------------------------------------
    def watch_cursor(self) -> None:
        self.refresh()
        self.post_message(self.Moved(self.selected()))

    def action_nudge(self, dx: int, dy: int) -> None:
        x, y = self.cursor
        self.cursor = (max(0, min(x + dx, self.size.width - 1)), max(0, min(y + dy, self.size.height - 1)))

    def action_next_flag(self, step: int) -> None:
        if not len(self.flag_order):
            return
        self._flag_i = (self._flag_i + step) % len(self.flag_order)
        self._stepped = int(self.flag_order[self._flag_i])
        cell = self.cell_of(self._stepped)
        if cell == tuple(self.cursor):  # the same cell as before: no cursor change to announce the record
            self.watch_cursor()
        self.cursor = cell

    def action_open(self) -> None:
        position = self.selected()
        if position is not None:
            self.post_message(self.Opened(position))

    # -- drawing -------------------------------------------------------------------------------------
    def render(self) -> Text:
        if self.coords is None:
            return Text("No map yet.", style="dim")
        w, h = max(1, self.size.width), max(1, self.size.height)
        cells = self.cells()
        dots = np.zeros((h, w), dtype=np.int64)
        ordinary = ~self.flagged
        oc = cells[ordinary]
        np.bitwise_or.at(dots, (oc[:, 1], oc[:, 0]), DOT[oc[:, 2], oc[:, 3]])
        marks: dict[tuple[int, int], str] = {}
        for p in np.flatnonzero(self.flagged):
            x, y = int(cells[p, 0]), int(cells[p, 1])
            label = int(self.labels[p]) if self.labels is not None else -1
            marks[(y, x)] = str(label % 10) if label >= 0 else "◆"
        chosen = self.selected()
        cx, cy = self.cell_of(chosen) if chosen is not None else tuple(self.cursor)
        ux, uy = self.cursor
        out = Text(no_wrap=True)
        for y in range(h):
            for x in range(w):
                mark = marks.get((y, x))
                if (x, y) == (cx, cy):
                    out.append("◉", style="bold reverse")
                elif (x, y) == (ux, uy):  # the cursor cell, when the record nearest to it is elsewhere
                    out.append(mark or "+", style="reverse")
                elif mark is not None:
                    out.append(mark, style="bold")
                elif dots[y, x]:
                    out.append(chr(BRAILLE + int(dots[y, x])), style="dim")
                elif y == cy or x == cx:  # the crosshair through the empty cells
                    out.append("─" if y == cy else "│", style="dim")
                else:
                    out.append(" ")
            if y < h - 1:
                out.append("\n")
        return out
