"""Columns: every column with its role, type, missing count and a distribution sketch; roles and log
transforms are changed here and the scan is started from here."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Header, Input, Static

from investigator.tui.plain import fit_lines, plain
from investigator.tui.widgets.scan_progress import ScanProgress

HEADERS = ("column", "role", "type", "missing", "distinct", "log", "distribution")


class ColumnsScreen(Screen):
    AUTO_FOCUS = "#columns-table"
    BINDINGS = [
        Binding("space", "toggle_role", "Feature/excluded"),
        Binding("l", "toggle_log", "Log"),
        Binding("s", "scan", "Scan"),
        Binding("escape", "cancel", "Cancel scan"),
        Binding("o", "other_file", "Open file", tooltip="Open another file"),
    ]

    def compose(self) -> ComposeResult:
        yield Header()
        yield Static("Loading...", id="columns-title")
        with Vertical(id="load-error", classes="hidden"):
            yield Static("", id="load-error-text")
            yield Input(placeholder="path of another file, then enter", id="other-file")
        yield DataTable(id="columns-table", cursor_type="row", zebra_stripes=False)
        yield Static("", id="column-why")
        yield ScanProgress()
        yield Footer(show_command_palette=False, compact=True)

    def on_mount(self) -> None:
        table = self.query_one(DataTable)
        for h in HEADERS:
            table.add_column(h, key=h)
        self.watch(self.app, "loaded", self._show_loaded)
        self.watch(self.app, "load_error", self._show_error)
        self.watch(self.app, "result", lambda _: self._refresh_cells())
        self._scanning = False
        self.watch(self.app, "progress", self._progress)

    def _progress(self, progress) -> None:
        """The footer's keys change when a scan starts or ends, not at each of its steps (a new footer each
        step would cost the main thread a recompose while the scan runs)."""
        if (progress is not None) != self._scanning:
            self._scanning = progress is not None
            self.refresh_bindings()

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        """esc (cancel the scan) is in the footer, and does something, only while a scan runs."""
        if action == "cancel":
            return self.app.progress is not None
        return True

    # -- showing -------------------------------------------------------------------------------------
    def _show_loaded(self, loaded) -> None:
        table = self.query_one(DataTable)
        table.clear()
        if loaded is None:
            return
        t = loaded.table
        key = f", key column '{t.key_column}'" if t.key_column else ", no key column (records by row)"
        ref = getattr(loaded, "reference", None)
        against = (f" Scored against the reference {ref.name} ({ref.n_rows:,} records), whose columns these are."
                   if ref is not None else "")
        self.query_one("#columns-title", Static).update(plain(
            f"{t.name}: {t.n_rows:,} records, {len(loaded.rows)} columns{key}.{against} "
            "space: feature/excluded · l: log · s: scan"))
        for r in loaded.rows:
            table.add_row(*self._cells(r), key=r.name)
        table.focus()
        self._why()

    def _cells(self, r) -> tuple:
        choices, decided = self.app.choices, self.app.logged()
        role = choices.role(r.name)
        shown = role if role == r.role else f"{role} (was {r.role})"
        return tuple(map(plain, (r.name, shown, r.dtype, f"{r.missing:,}", f"{r.distinct:,}",
                                 choices.log_label(r.name, decided), r.sketch)))

    def _refresh_cells(self) -> None:
        loaded = self.app.loaded
        if loaded is None:
            return
        table = self.query_one(DataTable)
        for r in loaded.rows:
            for h, value in zip(HEADERS, self._cells(r), strict=True):
                table.update_cell(r.name, h, value, update_width=True)

    def _show_error(self, error: str | None) -> None:
        box = self.query_one("#load-error")
        box.set_class(error is None, "hidden")
        if error is not None:
            self.query_one("#load-error-text", Static).update(plain(f"Could not open the file: {error}"))
            self.query_one("#columns-title", Static).update("No data loaded.")
            self.query_one("#other-file", Input).focus()

    def _current(self) -> str | None:
        table = self.query_one(DataTable)
        if self.app.loaded is None or table.row_count == 0:
            return None
        return self.app.loaded.rows[table.cursor_row].name

    def _why(self) -> None:
        name = self._current()
        if name is not None:
            r = next(r for r in self.app.loaded.rows if r.name == name)
            # The whole sketch, level names uncut: the table's column is cut at 80 columns and its names at 10.
            why = self.query_one("#column-why", Static)
            text = f"{name}: {r.reason} · {r.whole or r.sketch}"
            why.update(plain("\n".join(fit_lines(text, max(20, why.content_size.width or self.size.width - 2), 2))))

    def on_data_table_row_highlighted(self, _event) -> None:
        self._why()

    # -- actions -------------------------------------------------------------------------------------
    def action_toggle_role(self) -> None:
        name = self._current()
        if name is not None:
            problem = self.app.choices.toggle_role(name)
            if problem:
                self.app.notify_plain(problem, severity="warning")
            self._refresh_cells()

    def action_toggle_log(self) -> None:
        name = self._current()
        if name is not None:
            problem = self.app.choices.toggle_log(name, self.app.logged())
            if problem:
                self.app.notify_plain(problem, severity="warning")
            self._refresh_cells()

    def action_scan(self) -> None:
        self.app.start_scan()

    def action_cancel(self) -> None:
        self.app.cancel_scan()

    def action_other_file(self) -> None:
        self.query_one("#load-error").remove_class("hidden")
        if self.app.load_error is None:
            self.query_one("#load-error-text", Static).update("Open another file:")
        self.query_one("#other-file", Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        if event.input.id == "other-file" and event.value.strip():
            self.app.open_path(event.value.strip())
