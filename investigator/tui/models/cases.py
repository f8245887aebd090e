"""The Cases screen's data: plain numpy arrays over every record, sorted and filtered without copying rows.

Sorting and filtering give an index array (``order``); the table widget draws only the rows it shows.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from investigator.tui.models.map import group_labels
from investigator.tui.models.screens import screen_marks
from investigator.tui.models.values import InputColumns, input_columns

if TYPE_CHECKING:  # pandas and the filter are imported in the workers, or on the first filter
    import pandas as pd

    from investigator.output.where import Condition

# Verdict order when sorting by verdict: decided leads first, undecided last.
VERDICT_RANK = {"confirmed": 0, "follow-up": 1, "benign": 2, "open": 3, "": 4}
NO_VERDICT = "none"


@dataclass
class CaseFilter:
    flagged_only: bool = False
    method: str | None = None      # only records this method flags
    pattern: str | None = None     # "isolated" or "group"
    verdict: str | None = None     # a state, or "none" for records without a verdict
    text: str = ""                 # part of the key
    where: str = ""                # an SQL WHERE condition on the result and input columns

    def describe(self) -> str:
        parts = []
        if self.flagged_only:
            parts.append("flagged")
        if self.method:
            parts.append(f"{self.method} flags")
        if self.pattern:
            parts.append(self.pattern)
        if self.verdict:
            parts.append(f"verdict {self.verdict}")
        if self.text:
            parts.append(f"key contains '{self.text}'")
        if self.where:
            parts.append(f"where {self.where}")
        return ", ".join(parts) if parts else "all records"


@dataclass
class CasesData:
    keys: np.ndarray              # str
    rows: np.ndarray              # 1-based data rows
    consensus: np.ndarray
    votes: np.ndarray
    flagged: np.ndarray
    scores: dict[str, np.ndarray]
    flags: dict[str, np.ndarray]
    ranking: np.ndarray           # positions by consensus, ties in file order (the engine's own ranking)
    pattern: np.ndarray | None    # "isolated" / "group N" / "" per record, when the result has groups
    rank: np.ndarray = field(default=None)    # 1 = most unusual; copies share a rank
    reason: np.ndarray = field(default=None)  # why a flagged record is flagged ("votes", "far beyond ...")
    verdicts: np.ndarray = field(default=None)  # str, "" where there is none
    notes: np.ndarray = field(default=None)
    screen_marks: dict[int, list[str]] = field(default_factory=dict)  # what the amount screens say of a record
    within: np.ndarray | None = None  # with peer groups: each record's consensus within its segment
    within_flagged: np.ndarray | None = None
    segment: np.ndarray | None = None  # its segment ("category = stationery")
    inputs: InputColumns | None = None  # the records' own values: every input column
    consensus_z: np.ndarray | None = None
    group: np.ndarray | None = None   # the small group's or large cluster's id, -1 for none (the CSV's group)
    pattern_kind: np.ndarray | None = None  # "isolated" / "group" / "" (the CSV's pattern)
    priority: np.ndarray | None = None  # learned from the verdicts (docs/learning.md), when there are some
    review_order: np.ndarray | None = None  # 1-based place in the review order, 0 for a record with a verdict
    learning: object | None = None  # the pipeline.priority.Learning they come from: reason_of(p) says why
    _lower_keys: np.ndarray | None = None
    _frame: pd.DataFrame | None = None
    _where: tuple[str, int, np.ndarray] | None = None  # the last WHERE mask: (condition, verdicts seen, mask)
    _verdicts_seen: int = 0

    @property
    def methods(self) -> list[str]:
        return list(self.scores)

    @property
    def n(self) -> int:
        return len(self.keys)

    def sorts(self) -> list[str]:
        """Every column the records can be sorted by: the result columns, then the input columns."""
        return ["consensus", *(["priority"] if self.priority is not None else []), "rank", "flag",
                *(["within"] if self.within is not None else []), "votes", *self.methods,
                *(["pattern"] if self.pattern is not None else []), "verdict", "note", "key",
                *(self.inputs.names if self.inputs is not None else [])]

    def set_verdicts(self, verdicts, notes) -> None:
        self.verdicts = np.array([v or "" for v in verdicts], dtype=object) if verdicts is not None else \
            np.full(self.n, "", dtype=object)
        self.notes = np.array([v or "" for v in notes], dtype=object) if notes is not None else \
            np.full(self.n, "", dtype=object)
        self._verdicts_seen += 1
        if self._frame is not None:
            self._frame["verdict"] = np.where(self.verdicts == "", None, self.verdicts)
            self._frame["note"] = np.where(self.notes == "", None, self.notes)

    def set_learning(self, learning) -> None:
        """The priority, review order and reasons of a ``pipeline.priority.Learning`` (None: no priority)."""
        self.learning = learning
        if learning is None:
            self.priority = self.review_order = None
        else:
            self.priority = np.asarray(learning.priority, dtype=float)
            self.review_order = np.asarray(learning.review_order, dtype=np.int64)
        self._frame = None  # the WHERE filter's columns change with it
        self._where = None

    def priority_reason(self, p: int) -> str:
        """Why the priority moved record ``p`` ("" without a priority); built for that record alone."""
        return self.learning.reason_of(p) if self.learning is not None else ""  # type: ignore[attr-defined]

    # -- the WHERE filter ------------------------------------------------------------------------------------
    def frame(self) -> pd.DataFrame:
        """The records as a WHERE condition sees them: the columns of the CSV output (docs/output.md) that the
        Cases list has, then every input column (dates as dates). Built on the first filter."""
        if self._frame is None:
            import pandas as pd  # loaded with the scan (0.6 s from cold); only the first filter gets here

            own: dict[str, object] = {"row": self.rows, "key": self.keys, "rank": self.rank,
                                      "consensus": self.consensus}
            if self.consensus_z is not None:
                own["consensus_z"] = self.consensus_z
            own.update(votes=self.votes, flagged=self.flagged,
                       flag_reason=np.where(self.reason == "", None, self.reason))
            own.update({f"score_{k}": v for k, v in self.scores.items()})
            own.update({f"flag_{k}": v for k, v in self.flags.items()})
            own["verdict"] = np.where(self.verdicts == "", None, self.verdicts)
            own["note"] = np.where(self.notes == "", None, self.notes)
            if self.priority is not None and self.review_order is not None and self.learning is not None:
                own["priority"] = self.priority
                own["review_order"] = pd.array([int(o) if o else None for o in self.review_order], dtype="Int64")
                reasons = self.learning.reason  # type: ignore[attr-defined]  # every record's, built once
                own["priority_reason"] = np.where(reasons == "", None, reasons)
            if self.pattern_kind is not None and self.group is not None:
                own["pattern"] = np.where(self.pattern_kind == "", None, self.pattern_kind)
                own["group"] = pd.array([int(g) if g > 0 else None for g in self.group], dtype="Int64")
            if self.within is not None and self.within_flagged is not None and self.segment is not None:
                own.update(segment=self.segment, within_consensus=self.within, within_flagged=self.within_flagged)
            frame = pd.DataFrame(own)
            if self.inputs is not None:
                frame = pd.concat([frame, self.inputs.typed.reset_index(drop=True)], axis=1)
            self._frame = frame
        return self._frame

    def where_mask(self, condition: str | Condition) -> np.ndarray:
        """The records for which the SQL WHERE ``condition`` holds; a ``WhereError`` (one line) when it cannot
        be read or names no column here. The last mask is kept until the verdicts change."""
        from investigator.output.where import parse_where  # tokenizer and parser of our own: 1 ms to import

        text = condition if isinstance(condition, str) else condition.text
        if self._where is not None and self._where[:2] == (text, self._verdicts_seen):
            return self._where[2]
        parsed = parse_where(text) if isinstance(condition, str) else condition
        mask = parsed.mask(self.frame())
        self._where = (text, self._verdicts_seen, mask)
        return mask

    def order(self, sort: str = "consensus", reverse: bool = False,
              flt: CaseFilter | None = None) -> np.ndarray:
        """Positions of the records to show, in display order. Every sort has its natural direction (highest
        score first, decided verdicts first, keys A to Z; an input column's numbers and dates highest first,
        its text A to Z); ``reverse`` flips it. Records without a value in an input column come last either
        way."""
        if self.inputs is not None and sort in self.inputs.names:
            idx, missing = self._sorted_input(sort)
            idx = np.concatenate([idx[::-1] if reverse else idx, missing])
        else:
            idx = self._sorted(sort)
            if reverse:
                idx = idx[::-1]
        mask = self.mask(flt or CaseFilter())
        return idx if mask is None else idx[mask[idx]]

    def _consensus_rank(self) -> np.ndarray:
        rank = np.empty(self.n, dtype=np.int64)
        rank[self.ranking] = np.arange(self.n)
        return rank

    def _sorted_input(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        """(records with a value, in the column's order, ties by consensus; records without one)."""
        assert self.inputs is not None
        primary, known = self.inputs.order(name)
        idx = np.lexsort((self._consensus_rank(), primary))
        return idx[known[idx]], idx[~known[idx]]

    def _sorted(self, sort: str) -> np.ndarray:
        if sort in ("consensus", "rank"):
            return self.ranking
        rank = self._consensus_rank()  # ties in any sort keep the consensus order
        if sort == "priority" and self.review_order is not None:
            # The review order; records with a verdict after it, in consensus order.
            return np.lexsort((rank, np.where(self.review_order > 0, self.review_order, self.n + 1)))
        if sort == "flag":
            primary = (~self.flagged).astype(np.int64)
        elif sort == "note":
            _, primary = np.unique(self.notes.astype(str), return_inverse=True)
            primary = np.where(self.notes == "", primary.max() + 1, primary)  # records without one last
        elif sort == "votes":
            primary = -self.votes
        elif sort == "within" and self.within is not None:
            primary = -self.within
        elif sort in self.scores:
            primary = -np.nan_to_num(self.scores[sort], nan=-np.inf)
        elif sort == "pattern" and self.pattern is not None:
            _, primary = np.unique(self.pattern.astype(str), return_inverse=True)
            primary = np.where(self.pattern == "", primary.max() + 1, primary)  # records without one last
        elif sort == "verdict":
            primary = np.array([VERDICT_RANK.get(v, 3) for v in self.verdicts])
        elif sort == "key":
            _, primary = np.unique(self.keys, return_inverse=True)
        else:
            raise ValueError(f"unknown sort {sort!r}")
        return np.lexsort((rank, primary))

    def mask(self, flt: CaseFilter) -> np.ndarray | None:
        m = np.ones(self.n, dtype=bool)
        if flt.flagged_only:
            m &= self.flagged
        if flt.method:
            m &= self.flags[flt.method]
        if flt.pattern and self.pattern is not None:
            if flt.pattern == "isolated":
                m &= self.pattern == "isolated"
            else:
                m &= np.char.startswith(self.pattern.astype(str), "group")
        if flt.verdict:
            m &= self.verdicts == ("" if flt.verdict == NO_VERDICT else flt.verdict)
        if flt.text:
            if self._lower_keys is None:
                self._lower_keys = np.char.lower(self.keys)
            m &= np.char.find(self._lower_keys, flt.text.lower()) >= 0
        if flt.where:
            m &= self.where_mask(flt.where)
        return None if m.all() else m


def cases_data(result) -> CasesData:
    """The arrays of one scan result (called in the scan worker, so the UI thread only indexes)."""
    keys = np.array([str(k) for k in result.keys])
    labels = group_labels(result)
    grouping = getattr(result, "groups", None)
    pattern = None
    if labels is not None:
        # The grouping's own pattern when it has one (flagged records only), else: in a group or alone.
        own = getattr(getattr(result, "groups", None), "pattern", None)
        kind = np.asarray([p or "" for p in own], dtype=object) if own is not None and len(own) == len(keys) \
            else np.where(labels >= 0, "group", np.where(result.flagged, "isolated", ""))
        pattern = np.where(kind == "group", np.char.add("group ", labels.astype(str)), kind).astype(object)
    data = CasesData(
        keys=keys, rows=np.asarray(result.table.row_numbers), consensus=np.asarray(result.consensus),
        votes=np.asarray(result.votes), flagged=np.asarray(result.flagged, dtype=bool),
        scores={k: np.asarray(r.scores, dtype=float) for k, r in result.method_results.items()},
        flags={k: np.asarray(r.flags, dtype=bool) for k, r in result.method_results.items()},
        ranking=np.asarray(result.ranking()), pattern=pattern,
        rank=np.asarray(result.rank), reason=np.asarray(result.flag_reason, dtype=object),
        screen_marks=screen_marks(result.run.screens),
    )
    data.consensus_z = np.asarray(result.consensus_z, dtype=float)
    if grouping is not None and getattr(grouping, "group", None) is not None:  # the CSV's pattern and group
        data.pattern_kind = np.asarray([p or "" for p in grouping.pattern], dtype=object)
        data.group = np.asarray(grouping.group, dtype=np.int64)
    if getattr(result, "table", None) is not None and hasattr(result.table, "frame"):
        data.inputs = input_columns(result)
    within = getattr(result, "within", None)
    if within is not None:  # peer groups: the record as its own segment judges it
        data.within = np.asarray(within.consensus, dtype=float)
        data.within_flagged = np.asarray(within.flagged, dtype=bool)
        data.segment = np.array([s.label for s in within.segments], dtype=object)[within.segment]
    data.set_verdicts(result.verdicts, result.notes)
    data.set_learning(getattr(result, "learning", None))
    return data
