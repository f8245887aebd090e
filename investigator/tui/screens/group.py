"""Group: a small group of records that are unusual together, opened as one case with its profile."""

from __future__ import annotations

from typing import TYPE_CHECKING

from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import Screen
from textual.widgets import Footer, Header, Static

from investigator.output.explanation import format_value
from investigator.tui.plain import plain

if TYPE_CHECKING:  # the engine's types; the screen only reads them
    from investigator.structure.cases import GroupCase

MEMBERS_SHOWN = 50


class GroupScreen(Screen):
    """One group case (an entry of ``result.group_cases``): what its members share, and who they are."""

    BINDINGS = [
        Binding("v", "verdict", "Verdict on the group"),
        Binding("a", "verdict_members", "Verdict on each member"),
        Binding("escape", "back", "Back"),
    ]

    def __init__(self, case: GroupCase, verdict: str | None = None, **kwargs) -> None:
        super().__init__(**kwargs)
        self.case = case
        self.verdict = verdict

    def compose(self) -> ComposeResult:
        yield Header()
        with VerticalScroll(id="group-body"):
            yield Static(self._head(), id="group-head")
            yield Static("What the members share that the rest does not", classes="section")
            yield Static(self._profile(), id="group-profile")
            yield Static("Members", classes="section")
            yield Static(self._members(), id="group-members")
        yield Footer()

    def _head(self) -> str:
        c = self.case
        return (f"Group {c.group}: {c.size} records, {c.flagged} flagged - a pattern (records unusual "
                f"together), not a lone record. Verdict: {self.verdict or 'none'} "
                "(v: on the group, a: on each member)")

    def _profile(self) -> Table:
        table = Table(box=None, pad_edge=False)
        for col in ("feature", "group", "rest", "difference"):
            table.add_column(col, justify="left" if col == "feature" else "right")
        for p in self.case.profile[:8]:
            table.add_row(plain(p.feature), plain(format_value(p.group)), plain(format_value(p.rest)),
                          f"{p.difference:+.1f}")
        return table

    def on_mount(self) -> None:
        self.watch(self.app, "review_version", lambda _: self.query_one("#group-members", Static).update(
            self._members()))

    def _members(self) -> Text:
        members = self.case.members
        data = getattr(self.app, "cases", None)
        verdicts = data.verdicts if data is not None and data.verdicts is not None else None

        def said(m) -> str:
            verdict = verdicts[m.row - 1] if verdicts is not None and 0 < m.row <= len(verdicts) else ""
            return f", {verdict}" if verdict else ""

        shown = ", ".join(f"{m.key} (row {m.row}{said(m)})" for m in members[:MEMBERS_SHOWN])
        more = f" and {len(members) - MEMBERS_SHOWN} more" if len(members) > MEMBERS_SHOWN else ""
        return plain(shown + more)

    def set_verdict(self, verdict: str) -> None:
        self.verdict = verdict
        self.query_one("#group-head", Static).update(self._head())

    def action_verdict(self) -> None:
        self.app.ask_group_verdict(self)

    def action_verdict_members(self) -> None:
        """The same verdict on every member record, one history entry each (the group case keeps its own)."""
        c = self.case
        self.app.ask_verdicts([m.row - 1 for m in c.members], f"the {c.size} records of group {c.group}")

    def action_back(self) -> None:
        self.app.pop_screen()
