"""What would make a record ordinary for robust_distance: the smallest change to one or two features.

With r = x - mu (scaled units), P = S^-1 and d2 = r'P r, changing feature j by delta gives d2(delta) = d2 + 2
delta b_j + delta^2 P_jj with b = P r. Its minimum over delta is d2 - b_j^2 / P_jj; when that is below the
cutoff c, the smallest |delta| reaching c solves P_jj delta^2 + 2 b_j delta + (d2 - c) = 0 in closed form. For
a pair E = {j, k}: the change that minimises d2 over the pair is delta* = -P_EE^-1 b_E, lowering d2 by red =
b_E' P_EE^-1 b_E; along that direction d2(t delta*) = d2 - 2 t red + t^2 red, so the smallest t reaching c is
1 - sqrt(1 - (d2 - c) / red). The pair with the smallest change (Euclidean, in robust standard deviations) is
reported. When no pair suffices either (the record is far out in three or more features), features are added
in order of their Shapley contribution until the same move along the minimising direction reaches c;
``features_changed`` says how many, so "one or two were not enough" is visible. Changes are in the scaled
space and reported in the column's own units, through the inverse of any log transform. Only features
robust_distance uses, and not imputed cells.
"""

from __future__ import annotations

import numpy as np

from investigator.explain.contributions import robust_fit_labels
from investigator.explain.explanation import Change, NearestOrdinary

MARGIN = 1e-9  # land just under the cutoff, not on it


def nearest_ordinary(result, i: int) -> NearestOrdinary | None:
    """The change, or None when the record is not above the robust_distance cutoff or nothing suffices."""
    rd = result.method_results.get("robust_distance")
    if rd is None or not rd.flags[i]:
        return None
    m = rd.method
    cols = np.array([j for j in m.columns_ if not result.features.imputed[i, j]])
    if len(cols) == 0:
        return None
    pos = {j: n for n, j in enumerate(m.columns_)}
    idx = np.array([pos[j] for j in cols])
    x = result.features.values[i]
    location, P = _fit_of(result, i)
    r = x[m.columns_] - location
    b = (P @ r)[idx]
    d2 = float(r @ P @ r)
    c = float(rd.cutoffs[i]) * (1 - MARGIN)
    a = np.diag(P)[idx]
    disc = b**2 - a * (d2 - c)
    best = None
    feasible = disc > 0
    if feasible.any():
        delta = np.where(feasible, (-b + np.sign(b) * np.sqrt(np.where(feasible, disc, 0))) / a, np.inf)
        j = int(np.argmin(np.abs(delta)))
        best = ([int(cols[j])], np.array([delta[j]]))
    else:
        Pr = P @ r
        best = _best_pair(P, Pr, idx, cols, d2, c)
        if best is None:
            # Neither one nor two features suffice: add features in order of their Shapley contribution
            # until the move reaches the cutoff (all features always do: the centre itself is ordinary).
            order = np.argsort(-(r * Pr)[idx], kind="stable")
            for size in range(3, len(cols) + 1):
                chosen = sorted(order[:size])
                change = _along(P, Pr, [idx[u] for u in chosen], d2, c)
                if change is not None:
                    best = ([int(cols[u]) for u in chosen], change)
                    break
    if best is None:
        return None
    return _describe(result, i, best[0], best[1], m, d2)


def _fit_of(result, i: int):
    fits, labels = robust_fit_labels(result, np.array([i]))
    return fits[int(labels[0])]


def _best_pair(P, Pr, idx, cols, d2, c):
    """The pair of features with the smallest move reaching c, all pairs at once (2 x 2 solves in closed
    form); None when no pair can reach it. Ties keep the first pair in feature order."""
    if len(idx) < 2:
        return None
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
    if not np.isfinite(size).any():
        return None
    q = int(np.argmin(size))
    return [int(cols[u[q]]), int(cols[v[q]])], np.array([t[q] * s1[q], t[q] * s2[q]])


def _along(P, Pr, E, d2, c):
    """Smallest move along the direction that minimises d2 over features E, or None if it cannot reach c."""
    A = P[np.ix_(E, E)]
    step = -np.linalg.solve(A, Pr[E])
    red = float(-step @ Pr[E])
    if red <= d2 - c:
        return None
    return (1 - np.sqrt(1 - (d2 - c) / red)) * step


def _describe(result, i, features, deltas, method, d2_before) -> NearestOrdinary:
    x = result.features.values[i].copy()
    changes = []
    for j, delta in zip(features, deltas, strict=True):
        spec = result.features.specs[j]
        before = float(result.features.raw[i, j])
        after = float(spec.to_original(spec.unscaled(x[j] + delta)))  # through the bound's compression
        changes.append(Change(spec.name, before, after, after - before, float(delta)))
        x[j] += delta
    location, P = _fit_of(result, i)
    r = x[method.columns_] - location
    return NearestOrdinary(
        method="robust_distance",
        features_changed=len(changes),
        changes=tuple(changes),
        distance_before=d2_before,
        distance_after=float(r @ P @ r),
        cutoff=float(result.method_results["robust_distance"].cutoffs[i]),
    )
