"""One record's explanation: the combined view across methods, its peers and the smallest change.

Contributions per method become shares of what pushes the record out: each positive value over the sum of the
positive values (a negative Shapley value pulls the record toward ordinary; it keeps its value and has share
0). Combined view: the shares are averaged over the methods, and the features with the largest mean share are
listed with the record's raw value, the direction (explain/typical.py: higher / lower outside the typical
range, within it, in combination with another feature when inside it with a large share, rarer for a
category), the typical range among ordinary records (the unflagged records of a scan, the reference records
in reference mode; within the record's own category where a category takes part), the robust z-score the
methods saw, and the methods that point at it (share >= 25%, or the method's top feature).

Peers: the k nearest ordinary records in the scaled feature space (brute force, so exact), never the record
itself, with the features where the record differs most from the peers' median. Above ``PEER_SAMPLE_ABOVE``
ordinary records they are searched among a reproducible random sample of ``PEER_SAMPLE`` of them (not with
``exact``); the run record lists this under ``approximations``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from sklearn.neighbors import NearestNeighbors

from investigator.explain.contributions import method_contributions, shares
from investigator.explain.explanation import (
    Contribution,
    Explanation,
    MethodScore,
    Peer,
    PeerDifference,
    Peers,
    TopFeature,
)
from investigator.explain.nearest import nearest_ordinary
from investigator.explain.typical import TypicalValues, build_typical, direction
from investigator.methods.base import gaussian_scaling
from investigator.prepare import magnitudes
from investigator.prepare.features import Features
from investigator.prepare.roles import CATEGORICAL

POINTS_AT = 0.25
TOP = 5
PEER_SAMPLE_ABOVE = 100_000  # ordinary records; above this, peers come from a random sample of them
PEER_SAMPLE = 50_000


@dataclass
class Pool:
    """The ordinary records peers and typical ranges come from: the unflagged records of the scan, or in
    reference mode the (cleaned) reference records."""

    features: Features
    positions: np.ndarray  # rows of ``features`` in the pool
    rows: np.ndarray  # 1-based data rows in their file
    keys: list
    source: str  # "scan", "reference", or "sample" (the fit sample of a partitioned scan)

    @property
    def may_hold_the_record(self) -> bool:
        """Pool and scanned records come from one file, so a record must not be its own peer."""
        return self.source in ("scan", "sample")


def build_pool(result) -> Pool:
    """The pool of ordinary records of ``result`` (built once per result by its :class:`Explainer`)."""
    if result.reference is not None:
        ref = result.reference
        return Pool(result.reference_features, np.arange(ref.n_rows), ref.row_numbers, ref.keys, "reference")
    ordinary = np.flatnonzero(~result.flagged)
    if len(ordinary) == 0:
        ordinary = np.arange(result.n_records)
    return Pool(result.features, ordinary, result.table.row_numbers, result.keys, "scan")


def typical_ranges(pool: Pool) -> TypicalValues:
    """Per feature, what an ordinary record of ``pool`` looks like (explain/typical.py)."""
    return build_typical(pool.features, pool.positions)


def raw_value(features: Features, i: int, j: int):
    if j in features.levels:
        return str(features.levels[j][i])
    if features.imputed[i, j]:
        return None
    return float(features.raw[i, j])


def peer_candidates(pool: Pool, options) -> np.ndarray:
    """The pool's records peers are searched among: all of them up to ``PEER_SAMPLE_ABOVE``, else a
    reproducible random sample of ``PEER_SAMPLE`` (unless ``exact``), which keeps the search linear in the
    number of flagged records."""
    members = pool.positions
    if options.exact or len(members) <= PEER_SAMPLE_ABOVE:
        return members
    rng = np.random.default_rng([options.seed, 13])
    return np.sort(rng.choice(members, size=PEER_SAMPLE, replace=False))


def find_peers(result, pool: Pool, positions: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Rows (in the pool's features) and distances of the k nearest ordinary records to each record."""
    members = peer_candidates(pool, result.options)
    same = pool.may_hold_the_record
    k = min(k, len(members) - 1 if same and len(members) > 1 else len(members))
    if k <= 0:
        return np.zeros((len(positions), 0), dtype=int), np.zeros((len(positions), 0))
    index = NearestNeighbors(n_neighbors=k + int(same), algorithm="brute").fit(pool.features.values[members])
    dist, idx = index.kneighbors(result.features.values[positions])
    cand = members[idx]
    if not same:
        return cand, dist
    keep = pool.rows[cand] != result.table.row_numbers[positions][:, None]  # the record itself, by its row
    keep[:, -1] &= ~keep[:, :-1].all(axis=1)  # drop the last when the record itself is not among them
    return cand[keep].reshape(len(positions), k), dist[keep].reshape(len(positions), k)


def explain_positions(result, positions, pool: Pool, typical: TypicalValues, peers: int = 5,
                      prefer: Sequence[Sequence[str]] | None = None) -> list[Explanation]:
    """Explanations for the records at 0-based ``positions`` (batched where it pays), with peers from
    ``pool`` and the ``typical`` ranges of its records (what :class:`Explainer` keeps); ``prefer``: per
    position, the columns the smallest change should try first (those the cell findings point at)."""
    positions = np.asarray(positions, dtype=int)
    if len(positions) == 0:
        return []
    contrib = method_contributions(result, positions)
    peer_pos, peer_dist = find_peers(result, pool, positions, peers)
    return [
        _one(result, pool, i, n, contrib, peer_pos[n], peer_dist[n], typical, prefer[n] if prefer else None)
        for n, i in enumerate(positions)
    ]


def _one(result, pool, i, n, contrib, peer_pos, peer_dist, typical: TypicalValues,
         prefer: Sequence[str] | None = None) -> Explanation:
    names = result.features.names
    per_method = {}
    share_rows = []
    for key, values in contrib.items():
        v = values[n]
        sh = shares(np.maximum(v, 0)[None, :])[0]  # shares of what pushes the record out; pulling ones 0
        order = np.lexsort((np.where(v < 0, v, 0.0), -sh))  # pushing by share, then pulling, strongest first
        per_method[key] = tuple(Contribution(names[j], float(v[j]), float(sh[j])) for j in order if v[j] != 0)
        share_rows.append(sh)
    mean_share = np.mean(share_rows, axis=0)
    z = result.features.values[i]
    # Per method, the feature with the largest share when any share is positive (-1 when none): once per
    # record, not once per top feature.
    strongest = [int(row.argmax()) if row.max() > 0 else -1 for row in share_rows]
    top = []
    ranked = np.argsort(-mean_share, kind="stable")
    for j in ranked[:TOP]:
        if mean_share[j] <= 0:
            break
        spec = result.features.specs[j]
        pointing = tuple(key for key, row, most in zip(contrib, share_rows, strongest, strict=True)
                         if row[j] >= POINTS_AT or most == j)
        t = typical.of(result.features, i, j)
        value = raw_value(result.features, i, j)
        said = direction(spec.role, value, float(z[j]), t, float(mean_share[j]))
        top.append(TopFeature(
            feature=spec.name, value=value, direction=said, typical=t, robust_z=float(z[j]),
            share=float(mean_share[j]), methods=pointing, imputed=bool(result.features.imputed[i, j]),
            with_feature=_partner(names, ranked, mean_share, int(j)) if said == "combination" else None,
        ))
    return Explanation(
        row=int(result.table.row_numbers[i]),
        key=result.keys[i],
        flagged=bool(result.flagged[i]),
        votes=int(result.votes[i]),
        flag_reason=result.flag_reason[i] or None,
        rank=int(result.rank[i]),
        consensus=float(result.consensus[i]),
        consensus_z=float(result.consensus_z[i]),
        # The record's own values only: `r.far_beyond` and `r.unified` compute every record's (of 5.5 s for the
        # 1,403 flagged records' explanations at 50,000 records, 4.6 s went there).
        method_scores={
            key: MethodScore(float(r.scores[i]), float(r.cutoffs[i]), bool(r.flags[i]), float(r.z[i]),
                             bool(r.z[i] > r.far[i]), float(gaussian_scaling(r.z[i:i + 1])[0]))
            for key, r in result.method_results.items()
        },
        contributions=per_method,
        top_features=tuple(top),
        column_hits=tuple(result.column_hits[i]),
        peers=_peers(result, pool, i, peer_pos, peer_dist),
        nearest_ordinary=nearest_ordinary(result, i, typical.bounds, prefer_columns=prefer),
        stability=None if result.stability is None else float(result.stability[i]),
        resamples=result.options.resamples or None,
    )


def _peers(result, pool, i, peer_pos, peer_dist) -> Peers:
    F, names = pool.features, result.features.names
    rows = tuple(Peer(int(pool.rows[p]), pool.keys[p], float(d),
                      {names[j]: raw_value(F, int(p), j) for j in range(len(names))})
                 for p, d in zip(peer_pos, peer_dist, strict=True))
    differences: list[PeerDifference] = []
    if len(peer_pos):
        gap = result.features.values[i] - np.median(F.values[peer_pos], axis=0)
        for j in np.argsort(-np.abs(gap), kind="stable"):
            if len(differences) == 3 or gap[j] == 0:
                break
            spec = F.specs[j]
            if spec.role == CATEGORICAL:
                peer_values = [raw_value(F, int(p), j) for p in peer_pos]
                typical = max(peer_values, key=peer_values.count)  # ties: the nearest peer's value
            else:
                typical = float(spec.to_original(magnitudes.median(F.transformed[peer_pos, j])))
            value = raw_value(result.features, i, j)
            if value == typical:  # a level shared with most peers (its code's median may still differ): no difference
                continue
            differences.append(PeerDifference(spec.name, value, typical, float(gap[j])))
    return Peers(rows, tuple(differences), pool.source)


def _partner(names, ranked, mean_share, j: int) -> str | None:
    """The feature a share inside the typical range combines with: the one with the next largest share."""
    for k in ranked:
        if k != j and mean_share[k] > 0:
            return names[k]
    return None


SIGNS = {"higher": "+", "lower": "-", "within": "~", "rarer": "rare", "common": "common"}


def sign_text(said: str, partner: str | None) -> str:
    """The short direction of the one-line view: +, -, ~ (within the typical range), rare, common, or
    "with <feature>" for a feature unusual in combination with another."""
    if said == "combination":
        return f"with {partner}" if partner else "in combination"
    return SIGNS[said]


def top_features_text(explanation: Explanation, limit: int = 3) -> str:
    """E.g. "amount (+, 61%); hour (+, 22%); approver_level (with amount, 12%)" for CSV/Parquet."""
    return "; ".join(f"{t.feature} ({sign_text(t.direction, t.with_feature)}, {t.share:.0%})"
                     for t in explanation.top_features[:limit])


def top_features_texts(result, positions, limit: int = 3) -> list[str]:
    """:func:`top_features_text` of the records at ``positions``, computed for all of them at once from the
    contributions alone (no peers, no smallest change): what a one-row-per-record output needs."""
    positions = np.asarray(positions, dtype=int)
    if len(positions) == 0:
        return []
    contrib = method_contributions(result, positions)
    mean_share = np.mean([shares(np.maximum(v, 0)) for v in contrib.values()], axis=0)
    ranked = np.argsort(-mean_share, axis=1, kind="stable")
    typical = result.explainer.typical
    F = result.features
    Z, specs, names = F.values[positions], F.specs, F.names
    out = []
    for n, i in enumerate(positions):
        parts = []
        for j in ranked[n, :limit]:
            if mean_share[n, j] <= 0:
                continue
            said = direction(specs[j].role, raw_value(F, int(i), int(j)), float(Z[n, j]),
                             typical.of(F, int(i), int(j)), float(mean_share[n, j]))
            partner = _partner(names, ranked[n], mean_share[n], int(j)) if said == "combination" else None
            parts.append(f"{names[j]} ({sign_text(said, partner)}, {mean_share[n, j]:.0%})")
        out.append("; ".join(parts))
    return out
