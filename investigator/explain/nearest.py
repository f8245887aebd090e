"""What would make a record ordinary for robust_distance: the smallest change to one or two features.

With r = x - mu (scaled units), P = S^-1 and d2 = r'P r, changing feature j by delta gives d2(delta) = d2 + 2
delta b_j + delta^2 P_jj with b = P r. Its minimum over delta is d2 - b_j^2 / P_jj; when that is below the
cutoff c, the values of delta reaching c form the interval between the roots of P_jj delta^2 + 2 b_j delta +
(d2 - c) = 0, in closed form. For a pair E = {j, k}: the change that minimises d2 over the pair is delta* =
-P_EE^-1 b_E, lowering d2 by red = b_E' P_EE^-1 b_E; along that direction d2(t delta*) = d2 - 2 t red + t^2
red, so the smallest t reaching c is 1 - sqrt(1 - (d2 - c) / red). The pair with the smallest change
(Euclidean, in robust standard deviations) is reported. When no pair suffices either (the record is far out
in three or more features), features are added in order of their Shapley contribution until the same move
along the minimising direction reaches c; ``features_changed`` says how many, so "one or two were not
enough" is visible. Changes are in the scaled space and reported in the column's own units, through the
inverse of any log transform. Only features robust_distance uses, and not imputed cells.

The change respects each column's kind (``bounds``, explain/typical.py): a value stays within the observed
range of ordinary records (their lowest and highest value), and a column whose ordinary values are all whole
numbers (counts, codes, ratings, hours) gets a whole number. For one feature this is exact: the interval of
values reaching c is cut to the range and to whole numbers, and the nearest value left is taken. For two or
more, the continuous change is clipped and rounded (every floor/ceiling combination tried) and re-measured;
pairs are tried in order of size until one still reaches c. When none does, the closest one is reported
with ``reaches_cutoff`` False, and the text says it does not bring the record under the cutoff.

``prefer_columns`` (names) is the hook for changes that should touch given columns first (the cells other
findings point at): the search runs on those columns alone first and falls back to all of them.
"""

from __future__ import annotations

import itertools
from collections.abc import Mapping, Sequence

import numpy as np

from investigator.explain.contributions import robust_fit_labels
from investigator.explain.explanation import Change, NearestOrdinary
from investigator.explain.typical import Bounds

MARGIN = 1e-9  # land just under the cutoff, not on it


def nearest_ordinary(result, i: int, bounds: Mapping[int, Bounds] | None = None,
                     prefer_columns: Sequence[str] | None = None) -> NearestOrdinary | None:
    """The change, or None when the record is not above the robust_distance cutoff or nothing suffices.
    ``bounds``: per feature index, the observed range of ordinary records and whether it is whole numbers
    (none: the change is not constrained); ``prefer_columns``: names of columns to try first."""
    rd = result.method_results.get("robust_distance")
    if rd is None or not rd.flags[i]:
        return None
    m = rd.method
    usable = [int(j) for j in m.columns_ if not result.features.imputed[i, j]]
    if not usable:
        return None
    search = _Search(result, i, m, float(rd.cutoffs[i]), dict(bounds or {}))
    candidate_sets = []
    if prefer_columns:
        wanted = set(prefer_columns)
        preferred = [j for j in usable if result.features.names[j] in wanted]
        if preferred and len(preferred) < len(usable):
            candidate_sets.append(preferred)
    candidate_sets.append(usable)
    closest = None
    for cols in candidate_sets:
        found = search.run(np.array(cols))
        if found is not None and found[3]:
            return search.describe(*found)
        if found is not None and (closest is None or found[4] < closest[4]):
            closest = found
    return None if closest is None else search.describe(*closest)


PAIRS_TRIED = 25  # pairs re-measured after rounding and clipping, smallest continuous change first
COMBINATIONS = 64  # floor/ceiling combinations tried for a change to several whole-number columns


class _Search:
    """The smallest change for record i, in the scaled space of the fit it is measured against."""

    def __init__(self, result, i: int, method, cutoff: float, bounds: dict[int, Bounds]) -> None:
        self.features = result.features
        self.i, self.method, self.cutoff, self.bounds = i, method, cutoff, bounds
        self.pos = {int(j): n for n, j in enumerate(method.columns_)}
        self.location, self.P = _fit_of(result, i)
        self.x = result.features.values[i]
        self.r = self.x[method.columns_] - self.location
        self.d2 = float(self.r @ self.P @ self.r)
        self.c = cutoff * (1 - MARGIN)

    # -- units ----------------------------------------------------------------------------------------
    def to_value(self, j: int, z: float) -> float:
        spec = self.features.specs[j]
        # through the magnitude bound, so a scaled value beyond it maps back to the value it came from
        return float(spec.to_original(spec.unscaled(np.array([z]))[0]))

    def to_scaled(self, j: int, value: float) -> float:
        spec = self.features.specs[j]
        t = np.log(value + spec.offset) if spec.transform == "log" else value
        return float(spec.scaled(np.array([t], dtype=float))[0])

    def distance(self, features: list[int], deltas: np.ndarray) -> float:
        r = self.r.copy()
        for j, delta in zip(features, deltas, strict=True):
            r[self.pos[j]] += delta
        return float(r @ self.P @ r)

    # -- the search -----------------------------------------------------------------------------------
    def run(self, cols: np.ndarray):
        """(features, deltas, values, reaches, distance) of the smallest change among ``cols``, or None."""
        idx = np.array([self.pos[int(j)] for j in cols])
        Pr = self.P @ self.r
        single = self._single(cols, idx, Pr)
        if single is not None:
            return single
        closest = None
        for features, deltas in _pairs_by_size(self.P, Pr, idx, cols, self.d2, self.c)[:PAIRS_TRIED]:
            found = self._kept_in_kind(features, deltas)
            if found[3]:
                return found
            closest = found if closest is None or found[4] < closest[4] else closest
        # Neither one nor two features suffice: add features in order of their Shapley contribution until
        # the move reaches the cutoff (all features always do: the centre itself is ordinary).
        order = np.argsort(-(self.r * Pr)[idx], kind="stable")
        for size in range(3, len(cols) + 1):
            chosen = sorted(order[:size])
            change = _along(self.P, Pr, [idx[u] for u in chosen], self.d2, self.c)
            if change is not None:
                found = self._kept_in_kind([int(cols[u]) for u in chosen], change)
                if found[3]:
                    return found
                closest = found if closest is None or found[4] < closest[4] else closest
        return closest

    def _single(self, cols, idx, Pr):
        """The one-feature change of smallest |delta| that reaches c within each column's kind: the interval
        of delta reaching c (between the two roots), cut to the observed range and to whole numbers."""
        a, b = np.diag(self.P)[idx], Pr[idx]
        disc = b**2 - a * (self.d2 - self.c)
        best = None
        for n in np.flatnonzero(disc > 0):
            j = int(cols[n])
            root = np.sqrt(disc[n])
            z = self.x[j]
            low, high = self.to_value(j, z + (-b[n] - root) / a[n]), self.to_value(j, z + (-b[n] + root) / a[n])
            bound = self.bounds.get(j)
            if bound is not None:
                low, high = max(low, bound.low), min(high, bound.high)
                if bound.whole:
                    low, high = float(np.ceil(low)), float(np.floor(high))
            if low > high:
                continue
            for value in (low, high):
                delta = self.to_scaled(j, value) - z
                d2 = self.distance([j], np.array([delta]))
                if d2 <= self.cutoff and (best is None or abs(delta) < abs(best[1][0])):
                    best = ([j], np.array([delta]), [value], True, d2)
        return best

    def _kept_in_kind(self, features: list[int], deltas: np.ndarray):
        """The change clipped to the observed ranges and rounded for whole-number columns (each floor/ceiling
        combination tried), re-measured: the one that reaches c with the smallest change, else the closest."""
        clipped, whole = [], []
        for j, delta in zip(features, deltas, strict=True):
            value = self.to_value(j, self.x[j] + delta)
            bound = self.bounds.get(j)
            if bound is not None:
                value = min(max(value, bound.low), bound.high)
            clipped.append(value)
            whole.append(bound is not None and bound.whole)
        options = [sorted({float(np.floor(v)), float(np.ceil(v))}) if w else [v]
                   for v, w in zip(clipped, whole, strict=True)]
        if np.prod([len(o) for o in options]) > COMBINATIONS:  # too many to try: the nearest whole numbers
            options = [[float(np.round(v))] if w else [v] for v, w in zip(clipped, whole, strict=True)]
        best = None
        for values in itertools.product(*options):
            d = np.array([self.to_scaled(j, v) - self.x[j] for j, v in zip(features, values, strict=True)])
            d2 = self.distance(features, d)
            reaches = d2 <= self.cutoff
            key = (not reaches, float(np.hypot.reduce(d)) if reaches else d2)
            if best is None or key < best[0]:
                best = (key, (list(features), d, list(values), reaches, d2))
        assert best is not None
        return best[1]

    def describe(self, features, deltas, values, reaches, d2_after) -> NearestOrdinary | None:
        changes = []
        for j, delta, after in zip(features, deltas, values, strict=True):
            before = float(self.features.raw[self.i, j])
            if after == before:  # clipped or rounded back to where it was: not part of the change
                continue
            changes.append(Change(self.features.specs[j].name, before, float(after), float(after) - before,
                                  float(delta)))
        if not changes:  # every move was clipped or rounded away: nothing within the limits to show
            return None
        return NearestOrdinary(
            method="robust_distance",
            features_changed=len(changes),
            changes=tuple(changes),
            distance_before=self.d2,
            distance_after=d2_after,
            cutoff=self.cutoff,
            reaches_cutoff=bool(reaches),
        )


def _fit_of(result, i: int):
    fits, labels = robust_fit_labels(result, np.array([i]))
    return fits[int(labels[0])]


def _best_pair(P, Pr, idx, cols, d2, c):
    """The pair of features with the smallest move reaching c, all pairs at once (2 x 2 solves in closed
    form); None when no pair can reach it. Ties keep the first pair in feature order."""
    pairs = _pairs_by_size(P, Pr, idx, cols, d2, c)
    return pairs[0] if pairs else None


def _pairs_by_size(P, Pr, idx, cols, d2, c) -> list[tuple[list[int], np.ndarray]]:
    """Every pair of features whose move can reach c, as (features, change), smallest change first (ties in
    feature order)."""
    if len(idx) < 2:
        return []
    u, v = np.triu_indices(len(idx), k=1)
    a, b, e = P[idx[u], idx[u]], P[idx[u], idx[v]], P[idx[v], idx[v]]
    g1, g2 = Pr[idx[u]], Pr[idx[v]]
    det = a * e - b * b
    with np.errstate(divide="ignore", invalid="ignore"):
        s1, s2 = -(e * g1 - b * g2) / det, -(a * g2 - b * g1) / det  # step = -A^-1 g
        red = -(s1 * g1 + s2 * g2)
        ok = (det > 0) & (red > d2 - c)
        t = np.where(ok, 1 - np.sqrt(np.maximum(1 - (d2 - c) / red, 0)), np.inf)
    size = np.where(ok, t * np.hypot(s1, s2), np.inf)
    order = np.argsort(size, kind="stable")
    return [([int(cols[u[q]]), int(cols[v[q]])], np.array([t[q] * s1[q], t[q] * s2[q]]))
            for q in order if np.isfinite(size[q])]


def _along(P, Pr, E, d2, c):
    """Smallest move along the direction that minimises d2 over features E, or None if it cannot reach c."""
    A = P[np.ix_(E, E)]
    step = -np.linalg.solve(A, Pr[E])
    red = float(-step @ Pr[E])
    if red <= d2 - c:
        return None
    return (1 - np.sqrt(1 - (d2 - c) / red)) * step
