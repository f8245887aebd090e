"""Records like records marked benign: a known benign pattern (a yearly bonus run, a calibration batch) is
lowered in the priority, and says why: "like CLM-10234 and 3 others marked benign" (docs/learning.md).

Like means near in the prepared feature space, as near as the record's own neighbours: a benign record lies
within the record's distance to its k-th nearest neighbour in the scan's neighbour graph (the scan's k),
but never farther than the median of those distances over the table, so an isolated record, whose
neighbours are all far, is not like a benign record merely because everything is far from it. An exact copy
of a benign record (distance 0) is always like it.

The benign records are searched with the scan's own neighbour search (:class:`NeighborSearch`, exact, fitted
on the benign records' distinct locations), so copies and ties are treated as everywhere else in the scan.

Each benign verdict like a record lowers its log-odds by ``LIKENESS_STEP`` (0.25), up to ``LIKENESS_CAP``
(1.5, six verdicts): the share of the bound of one verdict (review/learning.py) that likeness may take.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from investigator.methods.neighbors import NeighborSearch
from investigator.review.learning import LIKENESS_STEP

LIKENESS_CAP = 6 * LIKENESS_STEP
NEAREST_BENIGN = 10  # benign locations looked at per record; more than the cap can count


@dataclass(frozen=True)
class Likeness:
    """Per record: how many benign verdicts it is like (``count``), the nearest benign record (``nearest``,
    a 0-based position, -1 for none) and the resulting change of its log-odds (``shift``, <= 0)."""

    count: np.ndarray
    nearest: np.ndarray
    shift: np.ndarray

    def reason(self, i: int, keys: list) -> str:
        """"like CLM-10234 and 3 others marked benign", or "" when the record is like none."""
        c = int(self.count[i])
        if c == 0:
            return ""
        first = keys[int(self.nearest[i])]
        others = f" and {c - 1} other{'s' if c > 2 else ''}" if c > 1 else ""
        return f"like {first}{others} marked benign"


def none_alike(n: int) -> Likeness:
    return Likeness(np.zeros(n, dtype=np.int64), np.full(n, -1, dtype=np.int64), np.zeros(n))


def benign_likeness(X: np.ndarray, benign: np.ndarray, case_of: np.ndarray, radius: np.ndarray) -> Likeness:
    """``X``: the prepared features (n x p); ``benign``: 0-based positions of records marked benign;
    ``case_of``: per record an integer naming its verdict (identical records under one verdict share it, so
    they count once); ``radius``: per record how near counts as like (module docstring)."""
    X = np.asarray(X, dtype=float)
    n = len(X)
    benign = np.asarray(benign, dtype=np.int64)
    if n == 0 or len(benign) == 0:
        return none_alike(n)
    B = X[benign]
    search = NeighborSearch(NEAREST_BENIGN, exact=True).fit(B)
    # Location -> the benign records there, in position order (the first names the location).
    at = search.locate(B)
    members: dict[int, list[int]] = {}
    for position, location in zip(benign.tolist(), at.tolist(), strict=True):
        members.setdefault(location, []).append(position)
    own = search.locate(X)
    m = len(search.locations_)
    width = min(NEAREST_BENIGN, m)
    indices = np.full((n, width), -1, dtype=np.int64)
    distances = np.full((n, width), np.inf)
    at_benign = np.flatnonzero(own >= 0)
    k = search.k_  # a record at a benign location: that location's own neighbours (the others), from the fit
    indices[at_benign, :k] = search.location_graph_.indices[own[at_benign]]
    distances[at_benign, :k] = search.location_graph_.distances[own[at_benign]]
    elsewhere = np.flatnonzero(own < 0)
    if len(elsewhere):  # the search's fitted index, in one call (its own chunks; each call has a fixed cost)
        d, i = search.index_.kneighbors(X[elsewhere].astype(search.dtype_), n_neighbors=width)
        indices[elsewhere], distances[elsewhere] = i, d
    r = np.asarray(radius, dtype=float)
    count = np.zeros(n, dtype=np.int64)
    nearest = np.full(n, -1, dtype=np.int64)
    near = (own >= 0) | (distances[:, 0] <= r)
    for i in np.flatnonzero(near).tolist():  # most records are near no benign one: only these are looked at
        candidates: list[int] = list(members[int(own[i])]) if own[i] >= 0 else []  # copies: at distance 0
        for location, distance in zip(indices[i].tolist(), distances[i].tolist(), strict=True):
            if location < 0 or distance > r[i]:
                break  # nearest first: the rest are farther
            candidates += members[location]
        cases: set[int] = set()
        for position in candidates:
            if position == i or case_of[position] == case_of[i]:
                continue  # a record is not like itself, nor like its own identical copies under one verdict
            if not cases:
                nearest[i] = position
            cases.add(int(case_of[position]))
        count[i] = len(cases)
    shift = -np.minimum(count * LIKENESS_STEP, LIKENESS_CAP)
    return Likeness(count, nearest, shift)
