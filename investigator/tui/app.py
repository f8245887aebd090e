"""The investigation workspace: state, workers and navigation; the screens draw, the engine computes.

Slow work (loading, scanning, explaining, saving) runs in thread workers; the engine is imported inside
them, so the first frame appears before pandas and scikit-learn are loaded.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING

from textual.app import App
from textual.binding import Binding
from textual.reactive import reactive
from textual.screen import ModalScreen
from textual.worker import Worker, WorkerState

from investigator.errors import InputError
from investigator.printable import printable
from investigator.review.store import default_store_path
from investigator.tui import jobs
from investigator.tui.keys import SCREEN_KEYS
from investigator.tui.models.columns import ColumnChoices
from investigator.tui.models.map import group_labels, map_coords
from investigator.tui.models.record import ViewCache
from investigator.tui.screens.cases import CasesScreen
from investigator.tui.screens.column_chooser import ColumnChooser
from investigator.tui.screens.columns import ColumnsScreen
from investigator.tui.screens.group import GroupScreen
from investigator.tui.screens.help import HelpScreen
from investigator.tui.screens.map import MapScreen
from investigator.tui.screens.record import RecordScreen
from investigator.tui.screens.screening import ScreensScreen
from investigator.tui.screens.verdict import PICKER_KEYS, VerdictScreen
from investigator.tui.settings import hint_seen
from investigator.tui.widgets.cases_table import CasesTable
from investigator.tui.widgets.map_canvas import MapCanvas
from investigator.tui.widgets.member_list import MemberList

if TYPE_CHECKING:  # imported in the workers, after the first frame
    from investigator.tui.models.record import RecordView

# Textual's own keys, which the footer leaves out (it has no room at 80 columns).
EXTRA_KEYS = [Binding("ctrl+p", "command_palette", "Command palette (themes, quit, ...)")]
# Absolute, so subclasses elsewhere (the benchmark) find it; it ships as package data (pyproject).
STYLES = Path(__file__).with_name("investigator.tcss")


class InvestigatorApp(App):
    CSS_PATH = STYLES
    TITLE = "investigator"
    MODES = {"columns": ColumnsScreen, "cases": CasesScreen, "map": MapScreen}
    BINDINGS = [
        *SCREEN_KEYS,
        Binding("question_mark", "help", "Keys"),
        Binding("q", "quit", "Quit"),
    ]

    loaded = reactive(None, always_update=True)       # jobs.Loaded
    load_error: reactive[str | None] = reactive(None, always_update=True)
    result = reactive(None, always_update=True)       # ScanResult
    cases = reactive(None, always_update=True)        # CasesData
    progress = reactive(None, always_update=True)     # (stage, fraction) while scanning, else None
    review_version = reactive(0)
    map_points = reactive(None, always_update=True)   # models.map.MapPoints
    map_progress = reactive(None, always_update=True)  # (stage, fraction) while the UMAP map is computed

    def __init__(self, path: str | Path, options=None, *, autoscan: bool = False, store=None,
                 reference=None, reference_sheet: str | None = None,
                 show_hint: bool | None = None, error_text: Callable[[InputError], str] = str,
                 columns=None, where: str | None = None, learn: bool = True, cache: bool | str = True) -> None:
        """``options``: a ScanOptions, or a dict of its fields (validated in the load worker, so a bad option
        shows as a one-line error in the UI and the first frame does not wait for the engine's imports).
        ``reference``: a trusted reference file; the records are scored against its fit, as ``check`` does.
        ``error_text``: the line shown for an InputError (``investigator open`` passes the one that speaks of
        its flags; by default the message as the API gives it). ``columns``: the input columns Cases shows at
        first (None: all, empty: none); ``where``: the SQL WHERE condition Cases starts filtered by (both
        checked in the load worker). ``learn``: learn a priority from the verdicts (``--no-learn``: not).
        ``cache``: reuse a kept scan of the same file and options, as the engine's ``scan(cache=...)`` does
        (``"refresh"``: scan again and keep it)."""
        super().__init__()
        self.learn = learn
        self.learn_version = 0  # the latest relearn asked for; an older one that finishes later is dropped
        self.scan_cache = cache
        self.case_columns = tuple(columns) if columns is not None else None
        self.case_where = where
        self.error_text = error_text
        self.path = Path(path)
        self.base_options = options
        self.autoscan = autoscan
        self.store_option = store
        self.reference = reference
        self.reference_sheet = reference_sheet
        self.content = None      # the table's content key (review.store.Content), which a verdict records
        if show_hint is None:  # shown until the user dismisses it once ('i'), then remembered
            show_hint = not hint_seen()
        self.show_hint = show_hint
        self.choices = None      # columns_model.ColumnChoices
        self.token: jobs.CancelToken | None = None
        self.map_token: jobs.CancelToken | None = None  # the UMAP map being computed
        self.views = None        # record_model.ViewCache
        self.group_labels = None
        self.last_error: str | None = None

    # -- start ---------------------------------------------------------------------------------------
    def on_mount(self) -> None:
        self.switch_mode("columns")
        self.open_path(self.path)

    def open_path(self, path: str | Path) -> None:
        self.path = Path(path)
        self.sub_title = printable(self.path.name)  # the name only: fits 80 columns
        self.load_error = None
        options, path, columns, where = self.base_options, self.path, self.case_columns, self.case_where
        reference, sheet, store = self.reference, self.reference_sheet, self.store_option
        self.run_worker(lambda: jobs.load(path, options, columns, where, reference=reference, reference_sheet=sheet,
                                          store=store),
                        thread=True, name="load", group="load", exclusive=True, exit_on_error=False)

    def _options_base(self):
        """The ScanOptions the table was loaded with (built in the load worker from a dict, if given one)."""
        return self.base_options

    # -- scanning ------------------------------------------------------------------------------------
    def logged(self) -> set[str]:
        """Columns the last scan log-transformed (what "auto" decided)."""
        if self.result is None:
            return set()
        return {s.name for s in self.result.features.specs if s.transform == "log"}

    def scan_options(self):
        return self.choices.options(self._options_base())

    def start_scan(self) -> None:
        if self.loaded is None:
            self.notify_plain("Nothing loaded to scan.", severity="warning")
            return
        if self.token is not None:
            self.notify_plain("A scan is running (esc cancels it).", severity="warning")
            return
        try:
            options = self.scan_options()
        except InputError as exc:
            self.notify_plain(self.error_text(exc), severity="error")
            return
        token = self.token = jobs.CancelToken()
        table, store, reference = self.loaded.table, self.store_path(), self.loaded.reference
        store_arg = store if store.exists() else None
        path = self.path

        def progress(stage: str, fraction: float) -> None:
            self.call_from_thread(setattr, self, "progress", (stage, fraction))

        self.progress = ("starting", 0.0)
        learn, cache = self.learn, self.scan_cache
        self.run_worker(lambda: jobs.run(table, options, progress, token, store_arg, path, reference=reference,
                                         learn=learn, cache=cache),
                        thread=True, name="scan", group="scan", exit_on_error=False)

    def cancel_scan(self) -> None:
        if self.token is not None:
            self.token.cancel()
            self.progress = ("cancelling (at the end of the current step)", self.progress[1]
                             if self.progress else 0.0)

    def store_path(self) -> Path:
        """The review store: the one the load found (review/stores.py), else the given or default one."""
        found = getattr(self.loaded, "store", None)
        if found is not None:
            return found.path
        return Path(self.store_option) if self.store_option else default_store_path(self.path)

    # -- worker results ------------------------------------------------------------------------------
    def on_worker_state_changed(self, event: Worker.StateChanged) -> None:
        worker, state = event.worker, event.state
        if state not in (WorkerState.SUCCESS, WorkerState.ERROR):
            return
        handler = getattr(self, f"_done_{worker.name}", None)
        if handler is not None:
            handler(worker.result if state == WorkerState.SUCCESS else None, worker.error)

    def notify_plain(self, message: str, **kwargs) -> None:
        """A notification whose text is shown as it is: it can quote names, keys and notes from the data, which
        must neither be read as markup (``[/]`` would stop the app) nor drive the terminal."""
        self.notify(printable(message), markup=False, **kwargs)

    def _message(self, error: BaseException) -> str:
        if isinstance(error, InputError):
            return self.error_text(error).replace("\n", " ")
        return f"internal error: {type(error).__name__}: {error}"

    def _done_load(self, loaded, error) -> None:
        if error is not None:
            self.last_error = self.load_error = self._message(error)
            return
        self.base_options = loaded.options
        self.choices = ColumnChoices.start(loaded.rows, loaded.options.log)
        self.result = self.cases = self.map_points = None
        self.content = loaded.store.content if loaded.store is not None else None
        self.loaded = loaded
        if loaded.store is not None and loaded.store.by_content:
            said = loaded.store.describe(loaded.table.name)
            self.notify_plain(said[:1].upper() + said[1:] + ".", timeout=8)
        if self.autoscan:
            self.start_scan()

    def _done_scan(self, value, error) -> None:
        self.token = None
        self.progress = None
        if error is not None:
            if isinstance(error, jobs.ScanCancelled):
                self.notify_plain("Scan cancelled; the previous result (if any) is kept.")
            else:
                self.last_error = self._message(error)
                self.notify_plain(self.last_error, severity="error", timeout=10)
            return
        result, cases, self.content = value
        self.views = ViewCache(result)
        self.group_labels = group_labels(result)
        self.stop_map(quiet=True)  # a map of the last scan's records
        self.map_points = None
        self.result = result
        self.cases = cases
        if self.current_mode == "columns":
            self.switch_mode("cases")

    # -- records -------------------------------------------------------------------------------------
    def open_record(self, position: int, order) -> None:
        self.push_screen(RecordScreen(position, order))

    def cached_view(self, position: int) -> RecordView | None:
        return self.views.get(position) if self.views is not None else None

    def request_view(self, position: int, callback, prefetch: list[int] = ()) -> None:
        views = self.views

        def work() -> None:
            view = views.compute(position)
            self.call_from_thread(callback, position, view)
            for p in prefetch:  # the records the user is likely to move to next
                views.compute(p)

        self.run_worker(work, thread=True, name="explain", group="explain", exit_on_error=False)

    def _done_explain(self, _value, error) -> None:
        if error is not None:
            self.notify_plain(self._message(error), severity="error")

    def request_map(self) -> None:
        """The map of the last scan: its own, else the principal components at once and the UMAP map in a
        worker, which replaces them when it is ready."""
        if self.result is None or self.map_points is not None:
            return
        result = self.result
        self.run_worker(lambda: map_coords(result), thread=True, name="map", group="map", exclusive=True,
                        exit_on_error=False)

    def _done_map(self, value, error) -> None:
        if error is not None:
            self.notify_plain(self._message(error), severity="error")
            return
        self.map_points = value
        if value.kind == "pca":
            self.start_map()

    def start_map(self) -> None:
        """Compute the UMAP map (as `--map auto` would) in a worker; ``map_progress`` follows it."""
        if self.result is None or self.map_token is not None:
            return
        token = self.map_token = jobs.CancelToken()
        result = self.result

        def progress(stage: str, fraction: float) -> None:
            self.call_from_thread(self._map_step, token, stage, fraction)

        self.map_progress = ("starting the UMAP map", 0.0)
        self.run_worker(lambda: (token, jobs.umap_map(result, progress, token)), thread=True, name="umap",
                        group="umap", exit_on_error=False)

    def _map_step(self, token: jobs.CancelToken, stage: str, fraction: float) -> None:
        if token is self.map_token and not token.cancelled:  # a stopped map's last steps are not shown
            self.map_progress = (stage, fraction)

    def stop_map(self, quiet: bool = False) -> None:
        """Stop the UMAP map being computed: the principal components stay (the worker's thread ends at the
        map's next step, and what it returns is dropped)."""
        if self.map_token is None:
            return
        self.map_token.cancel()
        self.map_token = None
        self.map_progress = None
        if not quiet:
            self.notify_plain("UMAP map stopped; the principal components stay (u computes it again).")

    def _done_umap(self, value, error) -> None:
        if error is not None:
            if not isinstance(error, jobs.MapCancelled):
                self.map_token, self.map_progress = None, None
                self.notify_plain(f"UMAP map not made: {self._message(error)}", severity="error", timeout=10)
            return
        token, points = value
        if token is not self.map_token or token.cancelled:  # stopped, or a new scan since
            return
        self.map_token, self.map_progress = None, None
        self.map_points = points

    # -- verdicts ------------------------------------------------------------------------------------
    def ask_verdict(self, position: int) -> None:
        d = self.cases
        screen = VerdictScreen(d.keys[position], int(d.rows[position]), d.verdicts[position] or None,
                               d.notes[position] or None)
        self.push_screen(screen, lambda answer: self.save_verdict(position, *answer) if answer else None)

    def save_verdict(self, position: int, state: str, note: str) -> None:
        table, store, content = self.result.table, self.store_path(), self.content
        run_id = self.result.run.started
        self.run_worker(lambda: jobs.save_verdict(table, position, state, note, store, run_id, content),
                        thread=True, name="verdict", group="verdict", exit_on_error=False)

    def ask_verdicts(self, positions: list[int], what: str, done: Callable[[], None] | None = None) -> None:
        """One verdict for several records at once (``what`` names them: "3 marked records"); each record gets
        its own history entry. The note box starts empty: left empty, every record keeps its own note.
        ``done`` runs once the verdicts are saved."""
        if not positions:
            return
        ask = VerdictScreen(what, None, None, None, several=True)

        def save(answer) -> None:
            if not answer:
                return
            state, note = answer
            table, store, content = self.result.table, self.store_path(), self.content
            run_id = self.result.run.started
            self.run_worker(lambda: (jobs.save_verdicts(table, positions, state, note or None, store, run_id,
                                                        content), what, done),
                            thread=True, name="verdicts", group="verdict", exit_on_error=False)

        self.push_screen(ask, save)

    def _done_verdicts(self, value, error) -> None:
        if error is not None:
            self.notify_plain(f"Verdicts not saved: {self._message(error)}", severity="error", timeout=10)
            return
        (entries, verdicts, notes), what, done = value
        self.result.verdicts, self.result.notes = verdicts, notes
        self.cases.set_verdicts(verdicts, notes)
        self.review_version += 1
        self.relearn()
        if done is not None:
            done()
        self.notify_plain(f"Saved: {what} are {entries[0].verdict}, {len(entries)} "
                          f"entr{'y' if len(entries) == 1 else 'ies'} in the history (in {self.store_path().name})")

    def _done_verdict(self, value, error) -> None:
        if error is not None:
            self.notify_plain(f"Verdict not saved: {self._message(error)}", severity="error", timeout=10)
            return
        entry, verdicts, notes = value
        self.result.verdicts, self.result.notes = verdicts, notes
        self.cases.set_verdicts(verdicts, notes)
        self.review_version += 1
        self.relearn()
        self.notify_plain(f"Saved: {entry.key or 'row ' + str(entry.row)} is {entry.verdict} "
                    f"(in {self.store_path().name})")

    def relearn(self) -> None:
        """Recompute the priority from the verdicts in a worker (docs/learning.md); keys go on meanwhile, and
        Cases and the Record screen show the new order when it is there."""
        if not self.learn or self.result is None:
            return
        self.learn_version += 1
        result, store, version = self.result, self.store_path(), self.learn_version
        self.run_worker(lambda: jobs.relearn(result, store, version), thread=True, name="learn", group="learn",
                        exit_on_error=False)

    def _done_learn(self, value, error) -> None:
        if error is not None:
            self.notify_plain(f"Priority not recomputed: {self._message(error)}", severity="error")
            return
        version, learning, described = value
        if version != self.learn_version or self.result is None or self.cases is None:
            return  # a newer verdict asked for a newer order
        self.result.learning = learning
        self.result.run = dataclasses.replace(self.result.run, learning=described)
        self.cases.set_learning(learning)
        self.review_version += 1

    def open_group(self, position: int) -> None:
        """Open the small group the record at ``position`` belongs to as one case, with its profile."""
        grouping = getattr(self.result, "groups", None)
        cases = self.result.group_cases or []
        gid = int(grouping.group[position]) if grouping is not None else -1
        case = next((c for c in cases if c.group == gid), None)
        if case is None:
            self.notify_plain("This record is not in a group of unusual records.", timeout=4)
            return
        self.push_screen(GroupScreen(case, jobs.group_verdict(case, self.store_path())))

    def ask_group_verdict(self, screen) -> None:
        case = screen.case
        ask = VerdictScreen(f"group {case.group} ({case.size} records)", None, screen.verdict, None)

        def save(answer) -> None:
            if not answer:
                return
            state, note = answer
            try:
                entry = jobs.save_group_verdict(case, state, note, self.store_path(),
                                                self.result.run.started, self.result.table.source.sha256,
                                                self.content)
            except Exception as exc:  # a store problem: one line, the UI goes on
                self.notify_plain(f"Verdict not saved: {self._message(exc)}", severity="error", timeout=10)
                return
            screen.set_verdict(entry.verdict)
            self.notify_plain(f"Saved: group {case.group} is {entry.verdict} (in {self.store_path().name})")

        self.push_screen(ask, save)

    # -- navigation ----------------------------------------------------------------------------------
    def action_show(self, mode: str) -> None:
        """Go to the screen ``mode`` itself (Columns, Cases, Map) from anywhere: a Record or Group opened
        from it is closed, so 2 always shows the Cases list, not the record last opened there."""
        while isinstance(self.screen, ModalScreen):  # a dialog (help, verdict) first: it is done with
            self.pop_screen()
        if self.current_mode != mode:
            self.switch_mode(mode)
        while len(self.screen_stack) > 1:
            self.pop_screen()

    def help_sections(self) -> dict[str, list]:
        """Every key of every screen, by screen (the help shows them; a test checks that no screen or widget
        with keys is missing)."""
        return {
            "Everywhere": [*self.BINDINGS, *EXTRA_KEYS], "Columns": ColumnsScreen.BINDINGS,
            "Cases": CasesTable.BINDINGS + CasesScreen.BINDINGS, "Column chooser (c in Cases)": ColumnChooser.BINDINGS,
            "Record": RecordScreen.BINDINGS,
            "Map": MapCanvas.BINDINGS + MapScreen.BINDINGS, "Group": GroupScreen.BINDINGS + MemberList.BINDINGS,
            "Verdict": VerdictScreen.BINDINGS + PICKER_KEYS, "Screens (t in Cases)": ScreensScreen.BINDINGS,
            "This help": HelpScreen.BINDINGS,
        }

    def action_help(self) -> None:
        self.push_screen(HelpScreen(self.help_sections()))
