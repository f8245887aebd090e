"""Cases: the records by consensus, sortable by any column and filterable (an SQL WHERE condition on any
column among others); the start of every drill-down."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import Footer, Header, Input, Static

from investigator.errors import InputError
from investigator.output.screens import breach_text, out_of_spec_records, record_labels
from investigator.tui.models.cases import NO_VERDICT, CaseFilter
from investigator.tui.plain import fit_lines, plain
from investigator.tui.screens.column_chooser import ColumnChooser
from investigator.tui.screens.screening import ScreensScreen
from investigator.tui.settings import mark_hint_seen
from investigator.tui.widgets.cases_table import CasesTable
from investigator.tui.widgets.scan_progress import ScanProgress

HINT = (
    "rank: 1 = most unusual · consensus 0-1: how strongly the methods together set a record apart, 0.5 at "
    "their cutoffs · votes: methods above their cutoff; FLAG at half or more, or when one method or the "
    "methods together are far beyond · pattern: a flag alone (isolated) or in a group · "
    "a flag is a lead, not proof · ←/→ a column, s sorts by it, c chooses the columns, w filters "
    "(amount > 5000 AND vendor = 'Q17') · i hides this, ? all keys"
)
WHERE_PLACEHOLDER = "SQL WHERE condition, e.g. amount > 5000 AND vendor = 'Q17' (enter applies, esc leaves)"
FILTERS = Binding.Group("Filter")
def hits_by_column(hits) -> str:
    """Every column hit of a record, grouped by column: "nights three_sigma, boxplot_fence; amount
    boxplot_fence" (all of them: the Record screen says each in words)."""
    rules: dict[str, list[str]] = {}
    for h in hits:
        rules.setdefault(str(h["column"]), []).append(str(h["rule"]))
    return "; ".join(f"{column} {', '.join(dict.fromkeys(r))}" for column, r in rules.items()) or "none"


VERDICT_FILTERS = (None, NO_VERDICT, "open", "confirmed", "benign", "follow-up")


class CasesScreen(Screen):
    AUTO_FOCUS = "#cases-table"
    # The footer has room at 80 columns for the keys used most; the filters are one hint ("f m g d / Filter"),
    # and every key is in the help (?) with its whole description.
    BINDINGS = [
        Binding("s", "sort", "Sort"),
        Binding("r", "reverse", "Reverse the sort", show=False),
        Binding("c", "choose_columns", "Columns shown (result and input columns)", show=False),
        Binding("w", "where", "Filter: an SQL WHERE condition on any column", show=False),
        Binding("f", "flagged", "Filter: flagged only", group=FILTERS),
        Binding("m", "method", "Filter: one method (again: the next)", group=FILTERS),
        Binding("g", "pattern", "Filter: isolated / in a group", group=FILTERS),
        Binding("d", "verdict_filter", "Filter: a verdict (again: the next)", group=FILTERS),
        Binding("slash", "search", "Search the key", show=False),
        Binding("x", "clear", "Clear every filter", show=False),
        Binding("v", "verdict", "Verdict"),
        Binding("o", "group", "Group", tooltip="Open the record's group as one case"),
        Binding("t", "screens", "Screens (Benford, round amounts, thresholds, ...)", show=False),
        Binding("space", "mark", "Mark/unmark (v then sets the verdict of every marked record)", show=False),
        Binding("u", "unmark", "Unmark all", show=False),
        Binding("i", "hint", "Hide the first-run hint", show=False),
        # Not in the footer (full at 80 columns); the status line names it when there is a priority.
        Binding("p", "priority", "Review order (learned from verdicts) / consensus order", show=False),
        Binding("escape", "leave_search", "Leave the search or WHERE box", show=False),
    ]

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self.sort = "consensus"
        self.reverse = False
        self.filter = CaseFilter()
        self.applied_start = False  # the columns and filter `investigator open` was given, applied once
        self.marked: set[int] = set()  # record positions marked for one verdict on all of them
        self._status = ""
        self._detail = ""  # the line under the table: the highlighted record

    def compose(self) -> ComposeResult:
        yield Header()
        yield Static("", id="cases-status")
        yield Static(HINT, id="hint")
        yield Input(placeholder="part of a key (enter to keep, esc to leave)", id="search", classes="hidden")
        yield Input(placeholder=WHERE_PLACEHOLDER, id="where", classes="hidden")
        yield Static("", id="where-error", classes="hidden")
        yield CasesTable(id="cases-table")
        yield Static("", id="cases-detail")
        yield ScanProgress()
        yield Footer(show_command_palette=False, compact=True)

    def on_mount(self) -> None:
        self.query_one("#hint").set_class(not self.app.show_hint, "hidden")
        self.watch(self.app, "cases", lambda _: self._new_cases())
        self.watch(self.app, "review_version", lambda _: self.refill(keep=True))

    @property
    def table(self) -> CasesTable:
        return self.query_one(CasesTable)

    def _new_cases(self) -> None:
        self.marked.clear()  # a new scan: marks were on the last one's list
        data = self.app.cases
        if data is not None and data.priority is not None and self.sort == "consensus" and not self.reverse:
            self.sort = "priority"  # verdicts exist: the review order they teach comes first (p: consensus)
        self.refill()

    def refill(self, keep: bool = True) -> None:
        data = self.app.cases
        table = self.table
        if data is None:
            self.query_one("#cases-status", Static).update("No scan yet: press 1 for the columns, then s.")
            table.refresh()
            return
        if not self.applied_start:
            self._apply_start(data)
        if self.sort not in data.sorts():
            self.sort = "consensus"
        if self.filter.method and self.filter.method not in data.methods:
            self.filter.method = None
        try:
            order = data.order(self.sort, self.reverse, self.filter)
        except InputError as exc:  # a WHERE condition that names a column this scan does not have
            self._where_failed(exc)
            self.filter.where = ""
            order = data.order(self.sort, self.reverse, self.filter)
        table.marked = self.marked
        table.set_rows(data, order, self.sort, self.reverse, keep=table.position if keep else None)
        direction = self._direction(data)
        result = self.app.result
        screens = " · t: screens" if result is not None and result.run.screens else ""
        if data.priority is not None:
            screens += " · p: consensus order" if self.sort == "priority" else " · p: review order"
        self._status = (f"{int(data.flagged.sum()):,} flagged of {data.n:,} · showing {len(order):,} "
                        f"({self.filter.describe()}) · sorted by {self.sort}, {direction}{screens}"
                        + self._out_of_spec(result))
        self._show_status()
        if not self.query_one("#search", Input).has_focus:  # typing a search keeps the focus in the box
            table.focus()

    def _direction(self, data) -> str:
        """The sort's direction in words."""
        if self.sort == "priority":
            return "last to review first" if self.reverse else "review order, learned from the verdicts"
        if self.sort in ("key", "pattern", "note"):
            return "Z to A" if self.reverse else "A to Z"
        if self.sort == "verdict":
            return "undecided first" if self.reverse else "decided first"
        if self.sort == "flag":
            return "unflagged first" if self.reverse else "flagged first"
        if self.sort == "rank":
            return "least unusual first" if self.reverse else "most unusual first"
        if data.inputs is not None and self.sort in data.inputs.names:
            kind = data.inputs.typed[self.sort].dtype.kind
            if kind == "M":
                return "earliest first" if self.reverse else "latest first"
            if not data.inputs.numeric[self.sort]:
                return "Z to A" if self.reverse else "A to Z"
        return "lowest first" if self.reverse else "highest first"

    def _apply_start(self, data) -> None:
        """The input columns and the filter given to `investigator open` (--columns, --no-columns, --where)."""
        self.applied_start = True
        start = getattr(self.app, "case_columns", None)
        if start is not None and data.inputs is not None:
            table = self.table
            names = dict(zip(data.inputs.source, data.inputs.names, strict=True))
            inputs = [names.get(c, c) for c in start]
            table.shown = [c for c, _ in table.optional_columns() if c not in set(data.inputs.names)] + \
                [c for c in inputs if c in set(data.inputs.names)]
        where = getattr(self.app, "case_where", None)
        if where:
            self.filter.where = where
            box = self.query_one("#where", Input)
            box.value = where
            box.remove_class("hidden")

    @staticmethod
    def _out_of_spec(result) -> str:
        """With --limits: how many records break a limit, and the first few of them by key."""
        if result is None or result.out_of_spec is None:
            return ""
        breaking = sum(1 for hits in result.out_of_spec if hits)
        if not breaking:
            return " · out of spec: none"
        labels = record_labels(result.keys, result.table.row_numbers, result.table.key_column)
        return f" · out of spec: {breaking:,} ({out_of_spec_records(result.out_of_spec, labels, 3, details=False)})"

    def _show_status(self) -> None:
        n = len(self.marked)
        marks = f" · {n:,} marked (v: a verdict on each, u: unmark)" if n else ""
        self.query_one("#cases-status", Static).update(plain(self._status + marks))

    def on_cases_table_highlighted(self, event: CasesTable.Highlighted) -> None:
        data, p = self.app.cases, event.position
        detail = self.query_one("#cases-detail", Static)
        if data is None or p is None:
            self._detail = ""
            detail.update("")
            return
        which = [m for m in data.methods if data.flags[m][p]]
        hit_text = hits_by_column(self.app.result.column_hits[p])
        verdict = data.verdicts[p] or "none"
        note = f" ({data.notes[p]})" if data.notes[p] else ""
        flag = f"FLAG ({data.reason[p]})" if data.flagged[p] else "not flagged"
        marks = data.screen_marks.get(p)
        screens = f" Screens: {'; '.join(marks)}." if marks else ""
        out_of_spec = self.app.result.out_of_spec
        if out_of_spec is not None and out_of_spec[p]:
            screens += f" Out of spec: {breach_text(out_of_spec[p])}."
        within = ""
        if data.within is not None and data.within_flagged is not None and data.segment is not None:
            within = (f" Within {data.segment[p]}: {'FLAG' if data.within_flagged[p] else 'not flagged'}, "
                      f"consensus {data.within[p]:.4f}.")
        learned = ""
        if data.priority is not None:
            why = data.priority_reason(p)
            learned = f" Priority {data.priority[p]:.4f}" + (f": {why}." if why else ".")
        self._detail = (f"{data.keys[p]} (row {data.rows[p]}, rank {data.rank[p]:,}): {flag}, above the cutoff "
                        f"of {', '.join(which) or 'no method'}. Column hits: {hit_text}. Verdict: {verdict}{note}."
                        f"{within}{screens}{learned}")
        self._show_detail()

    def _show_detail(self) -> None:
        """The line under the table in its fixed three lines; what does not fit ends with an ellipsis (the
        Record screen, enter, has all of it)."""
        detail = self.query_one("#cases-detail", Static)
        detail.update(plain("\n".join(fit_lines(self._detail, max(20, detail.content_size.width or self.size.width - 2),
                                                  3))))

    def on_resize(self) -> None:
        if self.is_mounted:
            self._show_detail()

    def on_cases_table_selected(self, event: CasesTable.Selected) -> None:
        self.app.open_record(event.position, self.table.order)

    # -- actions -------------------------------------------------------------------------------------
    def _cycle(self, options: list, current):
        return options[(options.index(current) + 1) % len(options)] if current in options else options[0]

    def action_sort(self) -> None:
        """Sort by the column under the column cursor (left/right choose it); again: the other direction."""
        if self.app.cases is None:
            return
        column = self.table.column
        if column not in self.app.cases.sorts():
            return
        if column == self.sort or (column == "rank" and self.sort == "consensus"):
            self.reverse = not self.reverse
        else:
            self.sort, self.reverse = column, False
        self.refill(keep=False)  # a new order starts at its top

    def action_priority(self) -> None:
        """Between the review order learned from the verdicts and the consensus order."""
        data = self.app.cases
        if data is None or data.priority is None:
            self.notify("No priority yet: it is learned once a record is confirmed, follow-up or benign.",
                        severity="warning")
            return
        self.sort = "consensus" if self.sort == "priority" else "priority"
        self.reverse = False
        self.refill(keep=False)

    def action_reverse(self) -> None:
        self.reverse = not self.reverse
        self.refill(keep=False)

    def action_flagged(self) -> None:
        self.filter.flagged_only = not self.filter.flagged_only
        self.refill()

    def action_method(self) -> None:
        if self.app.cases is not None:
            self.filter.method = self._cycle([None, *self.app.cases.methods], self.filter.method)
            self.refill()

    def action_pattern(self) -> None:
        if self.app.cases is None or self.app.cases.pattern is None:
            self.notify("No patterns in this result yet (no groups).", severity="warning")
            return
        self.filter.pattern = self._cycle([None, "isolated", "group"], self.filter.pattern)
        self.refill()

    def action_verdict_filter(self) -> None:
        self.filter.verdict = self._cycle(list(VERDICT_FILTERS), self.filter.verdict)
        self.refill()

    def action_search(self) -> None:
        box = self.query_one("#search", Input)
        box.remove_class("hidden")
        box.focus()

    def on_input_changed(self, event: Input.Changed) -> None:
        if event.input.id == "search" and event.value.strip() != self.filter.text:
            self.filter.text = event.value.strip()
            self.refill()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        if event.input.id == "search":
            self.table.focus()
        elif event.input.id == "where":
            self.apply_where(event.value.strip())

    def action_where(self) -> None:
        box = self.query_one("#where", Input)
        box.remove_class("hidden")
        box.focus()

    def apply_where(self, text: str) -> None:
        """Filter by the WHERE condition ``text`` (empty: no condition); a bad one is said in one line under
        the box, and the filter stays as it was."""
        data = self.app.cases
        if text and data is not None:
            try:
                data.where_mask(text)
            except InputError as exc:
                self._where_failed(exc)
                return
        self.query_one("#where-error", Static).add_class("hidden")
        self.filter.where = text
        if not text:
            self.query_one("#where", Input).add_class("hidden")
        self.table.focus()
        self.refill()

    def _where_failed(self, exc: InputError) -> None:
        line = self.query_one("#where-error", Static)
        reason = getattr(exc, "brief", str(exc))
        line.update(plain(f"Not applied: {reason}"))
        line.remove_class("hidden")
        box = self.query_one("#where", Input)
        box.remove_class("hidden")
        box.focus()

    def action_leave_search(self) -> None:
        for name in ("search", "where"):
            box = self.query_one(f"#{name}", Input)
            if box.has_focus:
                self.table.focus()
                if name == "where":
                    self.query_one("#where-error", Static).add_class("hidden")
                    box.value = self.filter.where  # what is typed and not applied is dropped
                if not box.value:
                    box.add_class("hidden")

    def action_clear(self) -> None:
        self.filter = CaseFilter()
        for name in ("search", "where"):
            box = self.query_one(f"#{name}", Input)
            box.value = ""
            box.add_class("hidden")
        self.query_one("#where-error", Static).add_class("hidden")
        self.refill()

    def action_choose_columns(self) -> None:
        data = self.app.cases
        if data is None:
            self.notify("No scan yet: press 1 for the columns, then s.", severity="warning")
            return
        table = self.table
        inputs = set(data.inputs.names) if data.inputs is not None else set()

        def chosen(shown: list[str] | None) -> None:
            if shown is not None:
                table.shown = shown
                table.refresh()

        self.app.push_screen(ColumnChooser(table.optional_columns(), inputs, table.shown), chosen)

    def action_verdict(self) -> None:
        if self.marked:  # a verdict on every marked record, one history entry each
            n = len(self.marked)
            self.app.ask_verdicts(sorted(self.marked), f"{n:,} marked record{'' if n == 1 else 's'}",
                                  done=self.action_unmark)
        elif self.table.position is not None:
            self.app.ask_verdict(self.table.position)

    def action_mark(self) -> None:
        """Mark the record under the cursor (or unmark it), and step to the next one."""
        p = self.table.position
        if p is None:
            return
        self.marked.symmetric_difference_update({p})
        self.table.action_move(1)
        self.table.refresh()
        self._show_status()

    def action_unmark(self) -> None:
        if self.marked:
            self.marked.clear()  # the table draws from the same set
            self.table.refresh()
            self._show_status()

    def action_screens(self) -> None:
        if self.app.result is None:
            self.notify("No scan yet: press 1 for the columns, then s.", severity="warning")
            return
        self.app.push_screen(ScreensScreen(self.app.result.run.screens))

    def action_group(self) -> None:
        if self.table.position is not None:
            self.app.open_group(self.table.position)

    def action_hint(self) -> None:
        self.app.show_hint = not self.app.show_hint
        self.query_one("#hint").set_class(not self.app.show_hint, "hidden")
        if not self.app.show_hint:
            mark_hint_seen()
