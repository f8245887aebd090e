"""The Cases screen's data: plain numpy arrays over every record, sorted and filtered without copying rows.

Sorting and filtering give an index array (``order``); the table widget draws only the rows it shows.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from investigator.tui.models.map import group_labels
from investigator.tui.models.screens import screen_marks

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
    _lower_keys: np.ndarray | None = None

    @property
    def methods(self) -> list[str]:
        return list(self.scores)

    @property
    def n(self) -> int:
        return len(self.keys)

    def sorts(self) -> list[str]:
        return ["consensus", *(["within"] if self.within is not None else []), "votes", *self.methods,
                *(["pattern"] if self.pattern is not None else []), "verdict", "key"]

    def set_verdicts(self, verdicts, notes) -> None:
        self.verdicts = np.array([v or "" for v in verdicts], dtype=object) if verdicts is not None else \
            np.full(self.n, "", dtype=object)
        self.notes = np.array([v or "" for v in notes], dtype=object) if notes is not None else \
            np.full(self.n, "", dtype=object)

    def order(self, sort: str = "consensus", reverse: bool = False,
              flt: CaseFilter | None = None) -> np.ndarray:
        """Positions of the records to show, in display order. Every sort has its natural direction (highest
        score first, decided verdicts first, keys A to Z); ``reverse`` flips it."""
        idx = self._sorted(sort)
        if reverse:
            idx = idx[::-1]
        mask = self.mask(flt or CaseFilter())
        return idx if mask is None else idx[mask[idx]]

    def _sorted(self, sort: str) -> np.ndarray:
        if sort == "consensus":
            return self.ranking
        rank = np.empty(self.n, dtype=np.int64)
        rank[self.ranking] = np.arange(self.n)  # ties in any sort keep the consensus order
        if sort == "votes":
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
        return None if m.all() else m


def cases_data(result) -> CasesData:
    """The arrays of one scan result (called in the scan worker, so the UI thread only indexes)."""
    keys = np.array([str(k) for k in result.keys])
    labels = group_labels(result)
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
    within = getattr(result, "within", None)
    if within is not None:  # peer groups: the record as its own segment judges it
        data.within = np.asarray(within.consensus, dtype=float)
        data.within_flagged = np.asarray(within.flagged, dtype=bool)
        data.segment = np.array([s.label for s in within.segments], dtype=object)[within.segment]
    data.set_verdicts(result.verdicts, result.notes)
    return data
