"""The explanation of one record, as typed parts: what :func:`investigator.explain.view.explain_positions`
builds and every reader (the terminal text, the report, the workspace, the JSON records) reads by attribute.

``to_dict()`` gives the JSON form (docs/output.md, docs/explanations.md): the same keys in the same order,
so the types can change their Python names without changing a file. Where a Python name differs from its
key, the key is a Python keyword or names something else here (``Peers.source`` is ``from``,
``Change.before``/``after`` are ``from``/``to``, ``Explanation.method_scores`` is ``methods``: in Python,
``methods`` is always a list of method keys).

Frozen, so an explanation computed once can be handed to any thread; numbers are plain Python numbers.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # for annotations only: the cell finder imports SciPy and pandas (1.8 s), which the
    # workspace's first frame and `investigator --help` must not wait for
    from investigator.explain.cells import CellFinding


@dataclass(frozen=True, slots=True)
class TypicalRange:
    """What an ordinary record's number looks like: median and quartiles in the column's own units, over
    ``records`` ordinary records: those of the record's own category (``group`` = the category column,
    ``level`` its level) or all of them (``group`` None; ``note`` says why when a category was too small)."""

    median: float
    q1: float
    q3: float
    records: int = 0
    group: str | None = None
    level: str | None = None
    note: str | None = None

    def to_dict(self) -> dict:
        return {"median": self.median, "q1": self.q1, "q3": self.q3, "records": self.records,
                "group": self.group, "level": self.level, "note": self.note}


@dataclass(frozen=True, slots=True)
class TypicalLevel:
    """What an ordinary record's category looks like: the commonest level and its share."""

    level: str
    share: float

    def to_dict(self) -> dict:
        return {"level": self.level, "share": self.share, "group": None}


Typical = TypicalRange | TypicalLevel


@dataclass(frozen=True, slots=True)
class MethodScore:
    """One method's view of the record: its score and the cutoff that applied (its kind's, with kinds of
    normal), whether it is above it, its z-value and whether that is far beyond, and the unified score."""

    score: float
    cutoff: float
    flag: bool
    z: float
    far_beyond: bool
    unified: float

    def to_dict(self) -> dict:
        return {"score": self.score, "cutoff": self.cutoff, "flag": self.flag, "z": self.z,
                "far_beyond": self.far_beyond, "unified": self.unified}


@dataclass(frozen=True, slots=True)
class Contribution:
    """One feature's part in one method's score: the contribution value as computed (signed: a negative
    robust_distance value pulls the record toward ordinary) and its share of what pushes the record out
    (value / sum of the positive values; 0 for a feature that pulls it in, so the shares add up to 1)."""

    feature: str
    value: float
    share: float

    def to_dict(self) -> dict:
        return {"feature": self.feature, "value": self.value, "share": self.share}


@dataclass(frozen=True, slots=True)
class TopFeature:
    """A feature of the combined view: the record's raw value (a level, a number, or None when it was
    imputed), its direction (explain/typical.py: ``higher`` / ``lower`` outside the typical range, ``within``
    it, ``combination`` inside it with a large share, ``rarer`` / ``common`` for a level), the typical range
    (the record's own category's where grouped), the robust z the methods saw, the mean share, the keys of
    the methods that point at it, and for ``combination`` the feature it combines with (``with_feature``)."""

    feature: str
    value: float | str | None
    direction: str
    typical: Typical
    robust_z: float
    share: float
    methods: tuple[str, ...]
    imputed: bool
    with_feature: str | None = None

    def to_dict(self) -> dict:
        return {"feature": self.feature, "value": self.value, "direction": self.direction,
                "typical": self.typical.to_dict(), "robust_z": self.robust_z, "share": self.share,
                "methods": list(self.methods), "imputed": self.imputed, "with_feature": self.with_feature}


@dataclass(frozen=True, slots=True)
class Peer:
    """One of the nearest ordinary records: its row and key, distance, and every feature's raw value."""

    row: int
    key: object
    distance: float
    values: dict[str, float | str | None]

    def to_dict(self) -> dict:
        return {"row": self.row, "key": self.key, "distance": self.distance, "values": dict(self.values)}


@dataclass(frozen=True, slots=True)
class PeerDifference:
    """A feature where the record differs most from its peers: its value, the peers' (median or commonest
    level) and the gap in robust standard deviations."""

    feature: str
    value: float | str | None
    peers: float | str | None
    gap_scaled: float

    def to_dict(self) -> dict:
        return {"feature": self.feature, "value": self.value, "peers": self.peers, "gap_scaled": self.gap_scaled}


@dataclass(frozen=True, slots=True)
class Peers:
    """The record's peers, the differences that matter most, and where the peers come from (``scan``,
    ``reference`` or ``sample``)."""

    records: tuple[Peer, ...]
    differences: tuple[PeerDifference, ...]
    source: str

    def to_dict(self) -> dict:
        return {"records": [p.to_dict() for p in self.records],
                "differences": [d.to_dict() for d in self.differences], "from": self.source}


@dataclass(frozen=True, slots=True)
class Change:
    """One feature of the smallest change: from and to in the column's units, and the change scaled."""

    feature: str
    before: float
    after: float
    change: float
    change_scaled: float

    def to_dict(self) -> dict:
        return {"feature": self.feature, "from": self.before, "to": self.after, "change": self.change,
                "change_scaled": self.change_scaled}


@dataclass(frozen=True, slots=True)
class NearestOrdinary:
    """The smallest change that brings the record under a method's cutoff (robust_distance), kept within the
    observed range of ordinary records and whole for whole-number columns; ``reaches_cutoff`` False when
    no such change was found and this is the closest one (``distance_after`` still above ``cutoff``)."""

    method: str
    features_changed: int
    changes: tuple[Change, ...]
    distance_before: float
    distance_after: float
    cutoff: float
    reaches_cutoff: bool = True

    def to_dict(self) -> dict:
        return {"method": self.method, "features_changed": self.features_changed,
                "changes": [c.to_dict() for c in self.changes], "distance_before": self.distance_before,
                "distance_after": self.distance_after, "cutoff": self.cutoff,
                "reaches_cutoff": self.reaches_cutoff}


WHOLE_TABLE = "the whole table"  # where a segment too small for a fit of its own is judged when none is near


@dataclass(frozen=True, slots=True)
class WithinSegment:
    """The record as its own segment judges it (peer groups, ``within``): the segment ("category = stationery")
    and its records, where it was scored (None: on its segment's own fit; another segment's label, or "the
    whole table", with the ``reason``), the combination there (flagged, votes of ``methods_voting``, consensus,
    flag reason), each method's view there, and the features that stand out among the segment's ordinary
    records (none when the segment was scored against another fit)."""

    segment: str
    records: int
    scored_against: str | None
    reason: str | None
    flagged: bool
    votes: int
    methods_voting: int
    consensus: float
    flag_reason: str | None
    method_scores: dict[str, MethodScore]
    top_features: tuple[TopFeature, ...]

    def to_dict(self) -> dict:
        return {"segment": self.segment, "records": self.records, "scored_against": self.scored_against,
                "reason": self.reason, "flagged": self.flagged, "votes": self.votes,
                "methods_voting": self.methods_voting, "consensus": self.consensus, "flag_reason": self.flag_reason,
                "methods": {k: m.to_dict() for k, m in self.method_scores.items()},
                "top_features": [t.to_dict() for t in self.top_features]}


@dataclass(frozen=True, slots=True)
class Explanation:
    """Why one record stands out (or does not): the combination's verdict, each method's view and
    contributions, the combined view, column hits, peers, the smallest change, and stability."""

    row: int
    key: object
    flagged: bool
    votes: int
    flag_reason: str | None
    rank: int
    consensus: float
    consensus_z: float
    method_scores: dict[str, MethodScore]
    contributions: dict[str, tuple[Contribution, ...]]
    top_features: tuple[TopFeature, ...]
    column_hits: tuple[dict, ...]  # as in the scan's records: {column, rule, value, limit, side}
    peers: Peers
    nearest_ordinary: NearestOrdinary | None
    stability: float | None
    resamples: int | None
    cells: tuple[CellFinding, ...] = ()  # the cells that deviate from what the other values predict
    within: WithinSegment | None = None  # with ``within``: the record as its own segment judges it

    def to_dict(self) -> dict:
        out = {
            "row": self.row,
            "key": self.key,
            "flagged": self.flagged,
            "votes": self.votes,
            "flag_reason": self.flag_reason,
            "rank": self.rank,
            "consensus": self.consensus,
            "consensus_z": self.consensus_z,
            "methods": {k: m.to_dict() for k, m in self.method_scores.items()},
            "contributions": self.contributions_dict(),
            "top_features": [t.to_dict() for t in self.top_features],
            "column_hits": [dict(h) for h in self.column_hits],
            "peers": self.peers.to_dict(),
            "nearest_ordinary": None if self.nearest_ordinary is None else self.nearest_ordinary.to_dict(),
            "stability": self.stability,
            "resamples": self.resamples,
            "cells": [c.to_dict() for c in self.cells],
        }
        if self.within is not None:  # only with peer groups: every other explanation keeps its keys
            out["within"] = self.within.to_dict()
        return out

    def contributions_dict(self) -> dict[str, list[dict]]:
        """``contributions`` as in the JSON records."""
        return {k: [c.to_dict() for c in items] for k, items in self.contributions.items()}

    def contributions_of(self, method: str) -> tuple[Contribution, ...]:
        """The method's contributions: those that push the record out, largest share first, then those that
        pull it toward ordinary (negative value), strongest first; none for a method that gave none."""
        return self.contributions.get(method, ())

    def pushing(self, method: str) -> tuple[Contribution, ...]:
        """The method's contributions that push the record out (positive value), largest share first."""
        return tuple(c for c in self.contributions_of(method) if c.value > 0)

    def pulling(self, method: str) -> tuple[Contribution, ...]:
        """The method's contributions that pull the record toward ordinary (negative value)."""
        return tuple(c for c in self.contributions_of(method) if c.value < 0)

    def flagged_by(self, method: str) -> bool:
        """Whether ``method`` puts the record above its cutoff (False for a method that did not run)."""
        score = self.method_scores.get(method)
        return score is not None and score.flag
