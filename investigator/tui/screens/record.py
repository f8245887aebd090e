"""Record: one record's values beside the typical range, contributions per method, why each method flags
it or not, column hits, peers side by side, and the smallest change that would make it ordinary."""

from __future__ import annotations

import numpy as np
from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import Screen
from textual.widgets import Footer, Header, Static

from investigator.explain.explanation import Explanation
from investigator.output.explanation import (
    cell_sentence,
    column_hit_text,
    format_value,
    nearest_sentence,
    typical_text,
    within_sentence,
)
from investigator.tui.models.record import RecordView
from investigator.tui.plain import plain
from investigator.tui.widgets.contribution_bars import ContributionBars

DEBOUNCE_S = 0.06  # moving fast through records asks the engine only for the one the user stops on


class RecordScreen(Screen):
    BINDINGS = [
        Binding("up", "move(-1)", "Previous"),
        Binding("down", "move(1)", "Next"),
        Binding("pageup", "scroll(-1)", "Scroll up", show=False),
        Binding("pagedown", "scroll(1)", "Scroll down", show=False),
        Binding("space", "scroll(1)", "Scroll down", show=False),
        Binding("v", "verdict", "Verdict"),
        Binding("escape", "back", "Back"),
    ]

    def __init__(self, position: int, order: np.ndarray, **kwargs) -> None:
        super().__init__(**kwargs)
        self.order = order
        where = np.flatnonzero(order == position)
        self.index = int(where[0]) if len(where) else 0
        self.position = position
        self.view: RecordView | None = None
        self._timer = None

    def compose(self) -> ComposeResult:
        yield Header()
        yield Static("", id="record-head")
        with VerticalScroll(id="record-body", can_focus=False):
            yield Static("", id="record-headline")
            yield Static("", id="record-within", classes="hidden")  # shown with peer groups (--within)
            yield Static("", id="record-change")
            yield Static("The record as read: every column of the file", classes="section", id="record-row-title")
            yield Static("", id="record-row")
            yield Static("Why each method flags it or not", classes="section")
            yield Static("", id="record-methods")
            yield Static("Contributions per method (share of what pushes the record out)", classes="section")
            yield ContributionBars(id="record-bars")
            yield Static("Values beside the typical range (unflagged records: quartiles, median; own category"
                         " where one takes part)",
                         classes="section")
            yield Static("", id="record-values")
            yield Static("Column hits", classes="section")
            yield Static("", id="record-hits")
            yield Static("Peers: the nearest unflagged records", classes="section")
            yield Static("", id="record-peers")
        yield Footer(show_command_palette=False, compact=True)

    def on_mount(self) -> None:
        self.query_one("#record-body").can_focus = False
        self.watch(self.app, "review_version", lambda _: self._head())
        self.show(self.position, debounce=False)

    # -- moving --------------------------------------------------------------------------------------
    def action_move(self, step: int) -> None:
        if len(self.order):
            self.index = max(0, min(self.index + step, len(self.order) - 1))
            self.show(int(self.order[self.index]))

    def show(self, position: int, debounce: bool = True) -> None:
        """Draw the cheap part at once; the explanation from the cache, or after a short pause."""
        self.position = position
        self._head()
        view = self.app.cached_view(position)
        if self._timer is not None:
            self._timer.stop()
            self._timer = None
        if view is not None:
            self._draw(view)
        else:
            self.query_one("#record-headline", Static).update(Text("explaining...", style="dim"))
            if debounce:
                self._timer = self.set_timer(DEBOUNCE_S, self._request)
            else:
                self._request()

    def _neighbours(self) -> list[int]:
        i = self.index
        return [int(self.order[j]) for j in (i + 1, i - 1, i + 2) if 0 <= j < len(self.order)]

    def _request(self) -> None:
        self.app.request_view(self.position, self._received, prefetch=self._neighbours())

    def _received(self, position: int, view: RecordView) -> None:
        if position == self.position and self.is_mounted:
            self._draw(view)

    def action_scroll(self, direction: int) -> None:
        body = self.query_one("#record-body", VerticalScroll)
        (body.scroll_page_down if direction > 0 else body.scroll_page_up)()

    def action_verdict(self) -> None:
        self.app.ask_verdict(self.position)

    def action_back(self) -> None:
        self.app.pop_screen()

    # -- drawing -------------------------------------------------------------------------------------
    def _head(self) -> None:
        d, p = self.app.cases, self.position
        verdict = d.verdicts[p] or "none"
        note = f" ({d.notes[p]})" if d.notes[p] else ""
        flag = f"FLAG ({d.reason[p]})" if d.flagged[p] else "not flagged"
        self.query_one("#record-head", Static).update(plain(
            f"Record {d.keys[p]} · row {d.rows[p]} · rank {d.rank[p]:,} · {flag} · consensus "
            f"{d.consensus[p]:.4f} · votes {d.votes[p]}/{len(d.methods)} · verdict: {verdict}{note} · "
            f"{self.index + 1} of {len(self.order)}" + _priority_text(d, p)))
        self.query_one("#record-row", Static).update(_record_row(d, p, self.size.width))

    def on_resize(self) -> None:
        if self.is_mounted and self.app.cases is not None:
            self.query_one("#record-row", Static).update(_record_row(self.app.cases, self.position, self.size.width))

    def _draw(self, view: RecordView) -> None:
        self.view = view
        e = view.explanation
        self.query_one("#record-headline", Static).update(plain(view.headline))
        within = self.query_one("#record-within", Static)
        within.set_class(e.within is None, "hidden")
        within.update(plain(within_sentence(e.within)) if e.within is not None else "")
        self.query_one("#record-change", Static).update(plain(_change(e)))
        self.query_one("#record-methods", Static).update(_methods(e))
        self.query_one(ContributionBars).show(e)
        self.query_one("#record-values", Static).update(_values(view))
        hits = e.column_hits
        self.query_one("#record-hits", Static).update(plain(
            "\n".join(column_hit_text(h) for h in hits)
            or "none: no single column is out of the ordinary by the per-column rules"))
        self.query_one("#record-peers", Static).update(_peers(view))


def _record_row(data, position: int, width: int) -> Table | Text:
    """Every input column of the record with its value as read (dates and text included), two to a line when
    the screen is wide enough."""
    if data.inputs is None:
        return plain("(no input columns)")
    cells = data.inputs.row(position)
    pairs = 2 if width >= 100 and len(cells) > 4 else 1
    t = Table(box=None, padding=(0, 1), show_edge=False, show_header=False, expand=False)
    for _ in range(pairs):
        t.add_column(style="bold", no_wrap=True, max_width=28)
        t.add_column(overflow="fold")
    rows = -(-len(cells) // pairs)
    for r in range(rows):
        line = []
        for c in range(pairs):
            k = c * rows + r  # down the first pair of columns, then the second
            name, value = cells[k] if k < len(cells) else ("", "")
            line += [plain(name), plain(value) if value != "" else Text("(empty)", style="dim") if name else plain("")]
        t.add_row(*line)
    return t


def _change(e: Explanation) -> str:
    """The cells that look wrong (first: what a reviewer checks at the source), then the smallest change."""
    cells = "".join(f"Cell: {cell_sentence(c)}\n" for c in e.cells)
    return cells + _smallest_change(e)


def _smallest_change(e: Explanation) -> str:
    nearest = e.nearest_ordinary
    if nearest:
        return nearest_sentence(nearest)
    if e.flagged_by("robust_distance"):
        return "No change to the features robust_distance uses brings it under its cutoff."
    return "robust_distance does not flag it: no change needed there."


def _methods(e: Explanation) -> Table:
    t = Table(box=None, padding=(0, 1), show_edge=False)
    for h, j in (("method", "left"), ("score", "right"), ("cutoff", "right"), ("flag", "left"),
                 ("top features", "left")):
        t.add_column(h, justify=j)
    for key, m in e.method_scores.items():
        tops = ", ".join(f"{c.feature} {c.share:.0%}" for c in e.pushing(key)[:2])
        verdict = "yes: above" if m.flag else "no: below"
        t.add_row(key, f"{m.score:.4g}", f"{m.cutoff:.4g}", verdict, plain(tops), style="bold" if m.flag else "")
    return t


def _values(view: RecordView) -> Table:
    t = Table(box=None, padding=(0, 1), show_edge=False)
    for h, j in (("feature", "left"), ("value", "right"), ("typical", "left"), ("z", "right"), ("", "left")):
        t.add_column(h, justify=j)
    top = {f.feature: f for f in view.explanation.top_features}
    cells = {c.column: c for c in view.explanation.cells}
    for v in view.values:
        f = top.get(v.feature)
        mark = ""
        cell = cells.get(v.feature)
        if cell is not None:  # a value that looks wrong: said before its direction, with what was expected
            expected = "" if cell.expected is None else f" expected ~{format_value(cell.expected)}"
            mark = f"✗ wrong?{expected}" + (f" {cell.tag}" if cell.tag else "")
        elif f is not None:
            mark = {"higher": "▲ higher", "lower": "▼ lower", "rarer": "◆ rare"}.get(f.direction, "")
            if f.direction == "combination":
                mark = f"◇ with {f.with_feature}" if f.with_feature else "◇ in combination"
        value = format_value(v.value) + (" (imputed)" if v.imputed else "")
        t.add_row(plain(v.feature), plain(value), plain(typical_text(v.typical)), f"{v.robust_z:+.1f}", plain(mark),
                  style="bold" if mark else "")
    return t


def _peers(view: RecordView) -> Table | Text:
    e = view.explanation
    peers = e.peers.records
    if not peers:
        return plain("no unflagged peers")
    names = [t.feature for t in e.top_features[:4]] or list(peers[0].values)[:4]
    t = Table(box=None, padding=(0, 1), show_edge=False)
    t.add_column("record")
    for n in names:
        t.add_column(plain(n, 12), justify="right")
    own = {v.feature: v.value for v in view.values}
    t.add_row(plain(f"this ({e.key})"), *[plain(format_value(own.get(n))) for n in names], style="bold")
    for p in peers:
        t.add_row(plain(f"{p.key} d={p.distance:.2f}"), *[plain(format_value(p.values.get(n))) for n in names])
    return t


def _priority_text(d, p: int) -> str:
    """The priority learned from the verdicts and why it moved the record (docs/learning.md), when there is
    one."""
    if d.priority is None or d.review_order is None:
        return ""
    place = f"next to review: {int(d.review_order[p]):,}" if d.review_order[p] else "reviewed"
    why = d.priority_reason(p) or "not moved by the verdicts"
    return f" · priority {d.priority[p]:.4f} ({place}; {why})"
