"""The priority learned from verdicts, wired to a scan result (docs/learning.md).

The scan's evidence per record (:func:`evidence`), the verdicts matched to its records, the model
(:mod:`investigator.review.learning`), the likeness to benign records (:mod:`investigator.review.likeness`)
and the review order (:mod:`investigator.review.review_order`) give ``result.learning``: ``priority``,
``review_order`` and ``priority_reason`` per record, and ``run.learning``. Flags, consensus and rank are
never changed: the priority is a column of its own. Nothing here writes to a store; it is handed the
matching a caller read.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from investigator.review.learning import (
    PRIORITY_BOUND,
    VERDICT_BOUND,
    PriorityModel,
    fit_priority,
    label_of,
    priority_of,
)
from investigator.review.likeness import LIKENESS_CAP, LIKENESS_STEP, Likeness, benign_likeness
from investigator.review.matching import Matching
from investigator.review.review_order import LEARN, LEARNING_SHARE, review_order

if TYPE_CHECKING:
    from investigator.pipeline.result import ScanResult

Z_TOP = 50.0          # a method's z-value at which its evidence reaches 1 (log scale below it)
HIT_COLUMNS = 8       # the columns with the most column hits, each an evidence of its own
GROUPS = 20           # the largest small groups and kinds of normal, each an evidence of its own
REASON_TERMS = 2      # evidence named in a record's reason
QUIET = 0.01          # a change of log-odds below this is no reason to mention


@dataclass(frozen=True)
class Evidence:
    """What the model reads per record: ``values`` (n x d, every entry in [-1, 1], the last column 1, the
    baseline) and one name per column. It depends on the scan only, so it is computed once per result."""

    values: np.ndarray
    names: tuple[str, ...]


def evidence(result: ScanResult) -> Evidence:
    """Each method's standardised score (sign(z) log(1 + |z|) / log(1 + 50), clipped to [-1, 1]), the
    column hits (their number, /3, capped at 1; and a hit in each of the most hit columns), the cell findings
    (their number, /3, capped at 1), the calendar parts as prepared (/3, clipped), membership of a small
    group and of each of the largest small groups and kinds of normal, and the baseline 1."""
    n = result.n_records
    columns: list[np.ndarray] = []
    names: list[str] = []
    for key, r in result.method_results.items():
        z = np.nan_to_num(np.asarray(r.z, dtype=float), nan=0.0, posinf=Z_TOP, neginf=-Z_TOP)
        columns.append(np.clip(np.sign(z) * np.log1p(np.abs(z)) / np.log1p(Z_TOP), -1.0, 1.0))
        names.append(f"{key} score")
    hits = result.column_hits
    counts = np.array([len(h) for h in hits], dtype=float)
    if counts.any():
        columns.append(np.minimum(counts / 3, 1.0))
        names.append("column hits")
        tally: dict[str, int] = {}
        for record in hits:
            for column in {h["column"] for h in record}:
                tally[column] = tally.get(column, 0) + 1
        for column in sorted(tally, key=lambda c: (-tally[c], c))[:HIT_COLUMNS]:
            columns.append(np.array([any(h["column"] == column for h in record) for record in hits], dtype=float))
            names.append(f"hit in {column}")
    found = result.cells.findings()
    if found:
        cells = np.zeros(n)
        for i, f in found.items():
            cells[i] = min(len(f) / 3, 1.0)
        if cells.any():
            columns.append(cells)
            names.append("cell findings")
    calendar = {c.name for c in result.columns if c.source}
    for j, name in enumerate(result.features.names):
        if name in calendar:
            columns.append(np.clip(np.nan_to_num(result.features.values[:, j]) / 3, -1.0, 1.0))
            names.append(f"{name} (calendar)")
    if result.groups is not None:
        small = np.asarray(result.groups.small_group)
        if (small > 0).any():
            columns.append((small > 0).astype(float))
            names.append("in a small group")
            ids, sizes = np.unique(small[small > 0], return_counts=True)
            for g in ids[np.argsort(-sizes, kind="stable")][:GROUPS]:
                columns.append((small == g).astype(float))
                names.append(f"small group {int(g)}")
    if result.kinds is not None:
        labels = np.asarray(result.kinds.labels)
        for k in np.unique(labels)[:GROUPS]:
            columns.append((labels == k).astype(float))
            names.append(f"kind {int(k) + 1}")
    columns.append(np.ones(n))
    names.append("baseline")
    values = np.column_stack(columns) if n else np.zeros((0, len(columns)))
    values.setflags(write=False)
    return Evidence(values, tuple(names))


@dataclass(frozen=True)
class Learning:
    """The priority learned from the verdicts in force on the scan's records.

    ``priority`` (0 to 1; the consensus itself where nothing moved it), ``shift`` (the change of log-odds:
    ``model_shift`` + ``likeness.shift``), ``review_order`` (1-based, 0 for records with a verdict),
    ``pick`` ("likely" or "learning"), ``moved`` (places up, + , or down, -, from the consensus order),
    ``model`` and ``likeness``, ``unmatched`` (verdicts whose record is not in the data: not learned from),
    ``evidence``. Why a record moved, in words: :meth:`reason_of` (one record, as the workspace asks) or
    :attr:`reason` (every record, for the outputs; built once)."""

    priority: np.ndarray
    shift: np.ndarray
    model_shift: np.ndarray
    review_order: np.ndarray
    pick: np.ndarray
    moved: np.ndarray
    model: PriorityModel
    likeness: Likeness
    unmatched: int
    evidence: Evidence
    keys: list = field(repr=False, default_factory=list)
    _reasons: dict = field(repr=False, default_factory=dict, compare=False)

    def reason_of(self, i: int) -> str:
        """Why the priority moved record ``i``: "up 12 places from consensus: verdicts weigh isolation score
        +0.42; like CLM-10234 and 3 others marked benign -0.50"; "" where it did not move."""
        values, names, weights = self.evidence.values, self.evidence.names, self.model.weights
        row = [(float(values[i, j] * weights[j]), j) for j in range(len(names)) if names[j] != "baseline"]
        row = sorted(row, key=lambda t: -abs(t[0]))[:REASON_TERMS]
        parts = []
        top = [(c, j) for c, j in row if abs(c) >= QUIET]
        if top:
            parts.append("verdicts weigh " + ", ".join(f"{names[j]} {c:+.2f}" for c, j in top))
        like = self.likeness.reason(i, self.keys)
        if like:
            parts.append(f"{like} {self.likeness.shift[i]:+.2f}")
        if self.pick[i] == LEARN:
            parts.append("a learning pick: the model is least sure about it")
        moved = int(self.moved[i])
        if not parts and (moved == 0 or abs(self.model_shift[i]) < QUIET):
            return ""
        head = (f"up {moved:,} place{'s' if moved != 1 else ''}" if moved > 0 else
                f"down {-moved:,} place{'s' if moved != -1 else ''}" if moved < 0 else "same place")
        # A record whose own log-odds fell can still move up (those above it fell more), and the other way:
        # said, so that the weights listed after it are not read as the reason for the move.
        if moved > 0 and self.shift[i] < 0:
            head += " (others above it were lowered more)"
        elif moved < 0 and self.shift[i] > 0:
            head += " (others below it were raised more)"
        return f"{head} from consensus" + (": " + "; ".join(parts) if parts else "")

    @property
    def reason(self) -> np.ndarray:
        """:meth:`reason_of` of every record (built on first use: a string per record)."""
        if "all" not in self._reasons:
            self._reasons["all"] = np.array([self.reason_of(i) for i in range(len(self.priority))], dtype=object)
        return self._reasons["all"]

    def describe(self) -> dict:
        """``run.learning`` in the JSON: how many verdicts were used and the model's parameters."""
        return {
            **self.model.describe(),
            "verdicts_not_in_the_data": self.unmatched,
            "likeness": {"step": LIKENESS_STEP, "cap": LIKENESS_CAP,
                         "records_lowered": int((self.likeness.count > 0).sum())},
            "review_order": {"likely_share": round(1 - LEARNING_SHARE, 6), "learning_share": LEARNING_SHARE},
            "bound": f"one verdict moves a record's log-odds by at most {VERDICT_BOUND:g}, its priority by at "
                     f"most {PRIORITY_BOUND:g}",
        }


def has_labels(matching: Matching) -> bool:
    return any(label_of(m.entry.verdict) is not None for m in matching.matches.values())


def learn(result: ScanResult, matching: Matching, previous: Learning | None = None) -> Learning | None:
    """The priority of ``result``'s records from the verdicts in ``matching``; None when no verdict there
    says matters or benign (then there is no priority: the consensus order stands). ``previous``: an
    earlier learning of the same result, whose evidence is reused (the workspace relearns after each
    verdict)."""
    if not has_labels(matching):
        return None
    found = previous.evidence if previous is not None else evidence(result)
    n = result.n_records
    labels = np.full(n, np.nan)
    weight = np.zeros(n)
    case_of = np.full(n, -1, dtype=np.int64)
    cases: dict[str, int] = {}
    for i, m in matching.matches.items():
        y = label_of(m.entry.verdict)
        case_of[i] = cases.setdefault(m.entry.case_id, len(cases))
        if y is None:
            continue
        labels[i] = y
        weight[i] = 1.0 / len(matching.rows_of.get(m.entry.case_id, [i]))  # a verdict's copies count once
    consensus = np.asarray(result.consensus, dtype=float)
    model = fit_priority(found.values, found.names, consensus, labels, weight)
    model_shift = model.shift(found.values)
    benign = np.flatnonzero(labels == 0)
    likeness = benign_likeness(result.features.values, benign, case_of, like_radius(result))
    shift = model_shift + likeness.shift
    priority = priority_of(consensus, shift)
    reviewed = np.array([i in matching.matches and matching.matches[i].entry.verdict != "open"
                         for i in range(n)], dtype=bool)
    p = priority
    uncertainty = p * (1 - p) * model.leverage(found.values)
    decided = len({m.entry.case_id for m in matching.matches.values() if m.entry.verdict != "open"})
    order, pick = review_order(priority, uncertainty, reviewed, result.consensus_z, decided)
    moved = places(result.consensus_z, result.consensus_z) - places(priority, result.consensus_z)
    return Learning(priority, shift, model_shift, order, pick, moved, model, likeness, len(matching.disappeared),
                    found, list(result.keys))


def like_radius(result: ScanResult) -> np.ndarray:
    """How near a benign record must be to count as like: the record's distance to its k-th nearest
    neighbour in the scan's graph, at most the median of those distances (review/likeness.py)."""
    graph = result.graph
    n = result.n_records
    if graph is None or graph.k == 0:
        return np.zeros(n)  # no neighbour search ran: only exact copies of benign records count as like
    radius, _ = graph.kth(graph.k)
    radius = np.asarray(radius, dtype=float)
    return np.minimum(radius, float(np.median(radius)))


def places(score: np.ndarray, consensus_z: np.ndarray) -> np.ndarray:
    """Each record's 1-based place when ordered by ``score`` (ties by consensus_z, then file order)."""
    n = len(score)
    order = np.lexsort((np.arange(n), -np.asarray(consensus_z), -np.asarray(score)))
    out = np.empty(n, dtype=np.int64)
    out[order] = np.arange(1, n + 1)
    return out
