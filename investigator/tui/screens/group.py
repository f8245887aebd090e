"""Group: a small group of records that are unusual together, opened as one case with its profile; its
members are a list, and enter opens a member's record (up/down there move through the members)."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
from rich.table import Table
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import Footer, Header, Static

from investigator.output.explanation import format_value
from investigator.tui.plain import plain
from investigator.tui.widgets.member_list import MemberList

if TYPE_CHECKING:  # the engine's types; the screen only reads them
    from investigator.structure.cases import GroupCase


class GroupScreen(Screen):
    """One group case (an entry of ``result.group_cases``): what its members share, and who they are."""

    BINDINGS = [
        Binding("v", "verdict", "Group verdict", tooltip="A verdict on the group as one case"),
        Binding("a", "verdict_members", "Each member", tooltip="One verdict on each member record"),
        Binding("escape", "back", "Back"),
    ]

    def __init__(self, case: GroupCase, verdict: str | None = None, **kwargs) -> None:
        super().__init__(**kwargs)
        self.case = case
        self.verdict = verdict

    AUTO_FOCUS = "#group-members"

    def compose(self) -> ComposeResult:
        yield Header()
        yield Static(self._head(), id="group-head")
        yield Static("What the members share that the rest does not", classes="section")
        yield Static(self._profile(), id="group-profile")
        yield Static(f"Members ({self.case.size}, most unusual first): enter opens one", classes="section")
        yield MemberList(id="group-members")
        yield Footer(show_command_palette=False, compact=True)

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
        self._members()
        self.watch(self.app, "review_version", lambda _: self._members(), init=False)

    def order(self) -> np.ndarray:
        """The members' record positions, most unusual first (the engine's ranking): the order the list
        shows and the Record screen steps through."""
        positions = np.array([m.row - 1 for m in self.case.members], dtype=np.int64)
        data = getattr(self.app, "cases", None)
        if data is None or data.rank is None:
            return positions
        return positions[np.argsort(np.asarray(data.rank)[positions], kind="stable")]

    def _members(self) -> None:
        """Every member, one line each: key, row, rank, flag and verdict (with its note)."""
        data = getattr(self.app, "cases", None)
        keys = {m.row - 1: m.key for m in self.case.members}
        lines = []
        for p in self.order().tolist():
            if data is None:
                lines.append((p, f"{keys[p]} · row {p + 1}"))
                continue
            flag = "FLAG" if data.flagged[p] else "not flagged"
            note = f" ({data.notes[p]})" if data.notes[p] else ""
            lines.append((p, f"{keys[p]} · row {data.rows[p]} · rank {data.rank[p]:,} · {flag} · "
                             f"verdict {data.verdicts[p] or 'none'}{note}"))
        self.query_one(MemberList).show_members(lines)

    def on_member_list_opened(self, event: MemberList.Opened) -> None:
        self.app.open_record(event.position, self.order())

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
