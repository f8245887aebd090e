"""Map: every record as a point of the 2-D map; move the cursor to a point and open it as a Record."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import Footer, Header, Static

from investigator.tui.plain import plain
from investigator.tui.widgets.map_canvas import MapCanvas

LEGEND = "⠂ ordinary  ◆ flagged alone  1-9 flagged, in group  + cursor"


class MapScreen(Screen):
    AUTO_FOCUS = "#map-canvas"
    BINDINGS = [Binding("v", "verdict", "Verdict"), Binding("o", "group", "Open group")]

    def compose(self) -> ComposeResult:
        yield Header()
        yield Static("No map yet: run a scan first.", id="map-status")
        yield MapCanvas(id="map-canvas")
        yield Static(LEGEND, id="map-legend")
        yield Footer()

    def on_mount(self) -> None:
        self.watch(self.app, "map_points", self._points)
        self.app.request_map()

    def _points(self, points) -> None:
        if points is None:
            return
        coords, source = points
        d = self.app.cases
        canvas = self.query_one(MapCanvas)
        canvas.set_points(coords, d.flagged, self.app.group_labels, d.ranking)
        self.query_one("#map-status", Static).update(f"Map: {source}. {int(d.flagged.sum())} flagged.")
        canvas.focus()

    def on_map_canvas_moved(self, event: MapCanvas.Moved) -> None:
        d, p = self.app.cases, event.position
        if d is None or p is None:
            return
        flag = "FLAG" if d.flagged[p] else "not flagged"
        self.query_one("#map-status", Static).update(plain(
            f"At the cursor: {d.keys[p]} (row {d.rows[p]}) · rank {d.rank[p]:,} · {flag} · "
            f"consensus {d.consensus[p]:.4f} · "
            f"votes {d.votes[p]}/{len(d.methods)} · verdict {d.verdicts[p] or 'none'} · enter opens it"
            + (" · o opens its group" if self.app.group_labels is not None and self.app.group_labels[p] > 0 else "")))

    def on_map_canvas_opened(self, event: MapCanvas.Opened) -> None:
        self.app.open_record(event.position, self.app.cases.ranking)

    def action_group(self) -> None:
        p = self.query_one(MapCanvas).selected()
        if p is not None:
            self.app.open_group(p)

    def action_verdict(self) -> None:
        p = self.query_one(MapCanvas).selected()
        if p is not None:
            self.app.ask_verdict(p)
