"""Map: every record as a point of the 2-D map; move the cursor to a point and open it as a Record.

Without a map from the scan (``--map``), the principal components are shown at once, labelled as such,
while the UMAP map is computed in a worker (progress below the map, esc stops it); it replaces them when
it is ready."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import Footer, Header, Static

from investigator.tui.plain import fit_lines, plain
from investigator.tui.widgets.map_canvas import MapCanvas
from investigator.tui.widgets.scan_progress import ScanProgress

LEGEND = "⠂ ordinary  ◆ flagged  1-9 flagged, in group  ◉ at the cursor (+)"


def legend(flagged: int) -> str:
    return LEGEND.replace("◆ flagged", f"◆ flagged ({flagged:,})", 1)


class MapScreen(Screen):
    AUTO_FOCUS = "#map-canvas"
    BINDINGS = [
        Binding("v", "verdict", "Verdict"),
        Binding("o", "group", "Group", tooltip="Open the cursor record's group as one case"),
        Binding("escape", "stop_map", "Stop UMAP", tooltip="Stop the UMAP map being computed (PCA stays)"),
        Binding("u", "start_map", "UMAP", tooltip="Compute the UMAP map (when PCA is shown)"),
    ]

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self._source = "No map yet: run a scan first."
        self._cursor = ""
        self._computing = False

    def compose(self) -> ComposeResult:
        yield Header()
        yield Static(self._source, id="map-status")
        yield MapCanvas(id="map-canvas")
        yield Static(LEGEND, id="map-legend")
        yield ScanProgress(follows="map_progress", cancel="esc stops it",
                           id="map-progress")
        yield Footer(show_command_palette=False, compact=True)

    def on_mount(self) -> None:
        self.watch(self.app, "map_points", self._points)
        self.watch(self.app, "map_progress", lambda _: self._progress())
        self.app.request_map()

    def _progress(self) -> None:
        """The first line says whether the UMAP map is on its way, or how to ask for it again; the footer's keys
        change when it starts or ends (not at each step: a new footer each step costs a recompose)."""
        computing = self.app.map_token is not None
        if computing != self._computing:
            self._computing = computing
            self.refresh_bindings()
        points = self.app.map_points
        if points is not None and points.kind == "pca":
            self._source = f"Map: {points.source}" + (" (being computed)" if self.app.map_token is not None
                                                      else "; u computes it")
            self._status()

    def on_screen_resume(self) -> None:
        self.app.request_map()  # after a new scan: its map

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        """esc only while the UMAP map is computed; u only while the principal components stand in for it."""
        if action == "stop_map":
            return self.app.map_token is not None
        if action == "start_map":
            points = self.app.map_points
            return self.app.map_token is None and points is not None and points.kind == "pca"
        return True

    def _points(self, points) -> None:
        if points is None:
            return
        d = self.app.cases
        canvas = self.query_one(MapCanvas)
        canvas.set_points(points.coords, d.flagged, self.app.group_labels, d.ranking)
        self._source = f"Map: {points.source}"
        self.query_one("#map-legend", Static).update(legend(int(d.flagged.sum())))
        self._progress()
        self.refresh_bindings()  # u shows only while the principal components stand in
        self._status()
        canvas.focus()

    def _status(self) -> None:
        """The map's source on the first line, the cursor's record on the next two (fixed: the canvas keeps its
        size); what does not fit ends with an ellipsis."""
        width = max(20, self.size.width - 2)
        lines = fit_lines(self._source, width, 1) + (fit_lines(self._cursor, width, 2) if self._cursor else [])
        self.query_one("#map-status", Static).update(plain("\n".join(lines)))

    def on_resize(self) -> None:
        if self.is_mounted:
            self._status()

    def on_map_canvas_moved(self, event: MapCanvas.Moved) -> None:
        d, p = self.app.cases, event.position
        if d is None or p is None:
            return
        flag = "FLAG" if d.flagged[p] else "not flagged"
        labels = self.app.group_labels
        group = f" · group {labels[p]}" if labels is not None and labels[p] > 0 else ""
        self._cursor = (f"◉ {d.keys[p]} (row {d.rows[p]}) · rank {d.rank[p]:,} · {flag} · "
                        f"consensus {d.consensus[p]:.4f} · votes {d.votes[p]}/{len(d.methods)} · "
                        f"verdict {d.verdicts[p] or 'none'}{group}")
        self._status()

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

    def action_stop_map(self) -> None:
        self.app.stop_map()

    def action_start_map(self) -> None:
        self.app.start_map()
