"""One record's explanation: the combined view across methods, its peers and the smallest change.

Combined view: each method's contributions become shares (negative Shapley values count 0 here), the shares
are averaged over the methods, and the features with the largest mean share are listed with the record's raw
value, the direction (higher / lower than typical, or rarer for a category), the typical range among ordinary
records (the unflagged records of a scan, the reference records in reference mode) (median and interquartile
range in the column's own units, or the commonest level), the robust z-score the methods saw, and the methods
that point at it (share >= 25%, or the method's top feature).

Peers: the k nearest ordinary records in the scaled feature space (brute force, so exact), never the record
itself, with the features where the record differs most from the peers' median. Above ``PEER_SAMPLE_ABOVE``
ordinary records they are searched among a reproducible random sample of ``PEER_SAMPLE`` of them (not with
``exact``); the run record lists this under ``approximations``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
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
    Typical,
    TypicalLevel,
    TypicalRange,
)
from investigator.explain.nearest import nearest_ordinary
from investigator.prepare import magnitudes
from investigator.prepare.features import MISSING_LEVEL, Features
from investigator.prepare.roles import CATEGORICAL

POINTS_AT = 0.25
TOP = 5
TYPICAL_Z = 0.5  # within half a robust standard deviation of the median: neither higher nor lower
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


def typical_ranges(pool: Pool) -> tuple[Typical, ...]:
    """Per feature, what an ordinary record of ``pool`` looks like."""
    F, members = pool.features, pool.positions
    out: list[Typical] = []
    for j, spec in enumerate(F.specs):
        if spec.role == CATEGORICAL:
            share = pd.Series(F.levels[j][members]).value_counts(normalize=True)
            out.append(TypicalLevel(str(share.index[0]), float(share.iloc[0])))
        else:
            keep = members[~F.imputed[members, j]]
            if not len(keep):
                # No ordinary record has a value here (a sparse column whose values are all in flagged
                # records): what is typical is to have none, as the category encoding would say.
                out.append(TypicalLevel(MISSING_LEVEL, 1.0))
                continue
            t = F.transformed[keep, j]
            q1, med, q3 = (float(spec.to_original(v)) for v in magnitudes.quantiles(t, [0.25, 0.5, 0.75]))
            out.append(TypicalRange(med, q1, q3))
    return tuple(out)


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


def explain_positions(result, positions, pool: Pool, typical: tuple[Typical, ...],
                      peers: int = 5) -> list[Explanation]:
    """Explanations for the records at 0-based ``positions`` (batched where it pays), with peers from
    ``pool`` and the ``typical`` ranges of its records (what :class:`Explainer` keeps)."""
    positions = np.asarray(positions, dtype=int)
    if len(positions) == 0:
        return []
    contrib = method_contributions(result, positions)
    peer_pos, peer_dist = find_peers(result, pool, positions, peers)
    return [
        _one(result, pool, i, n, contrib, peer_pos[n], peer_dist[n], typical) for n, i in enumerate(positions)
    ]


def _one(result, pool, i, n, contrib, peer_pos, peer_dist, typical) -> Explanation:
    names = result.features.names
    per_method = {}
    share_rows = []
    for key, values in contrib.items():
        v = values[n]
        sh = shares(v[None, :])[0]
        order = np.argsort(-np.abs(sh), kind="stable")
        per_method[key] = tuple(Contribution(names[j], float(v[j]), float(sh[j])) for j in order if v[j] != 0)
        share_rows.append(shares(np.maximum(v, 0)[None, :])[0])
    mean_share = np.mean(share_rows, axis=0)
    z = result.features.values[i]
    top = []
    for j in np.argsort(-mean_share, kind="stable")[:TOP]:
        if mean_share[j] <= 0:
            break
        spec = result.features.specs[j]
        pointing = tuple(key for key, row in zip(contrib, share_rows, strict=True)
                         if row[j] >= POINTS_AT or (row.max() > 0 and row.argmax() == j))
        top.append(TopFeature(
            feature=spec.name, value=raw_value(result.features, i, j), direction=_direction(spec, z[j]),
            typical=typical[j], robust_z=float(z[j]), share=float(mean_share[j]), methods=pointing,
            imputed=bool(result.features.imputed[i, j]),
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
        method_scores={
            key: MethodScore(float(r.scores[i]), float(r.cutoffs[i]), bool(r.flags[i]), float(r.z[i]),
                             bool(r.far_beyond[i]), float(r.unified[i]))
            for key, r in result.method_results.items()
        },
        contributions=per_method,
        top_features=tuple(top),
        column_hits=tuple(result.column_hits[i]),
        peers=_peers(result, pool, i, peer_pos, peer_dist),
        nearest_ordinary=nearest_ordinary(result, i),
        stability=None if result.stability is None else float(result.stability[i]),
        resamples=result.options.resamples or None,
    )


def _peers(result, pool, i, peer_pos, peer_dist) -> Peers:
    F, names = pool.features, result.features.names
    rows = tuple(Peer(int(pool.rows[p]), pool.keys[p], float(d),
                      {names[j]: raw_value(F, int(p), j) for j in range(len(names))})
                 for p, d in zip(peer_pos, peer_dist, strict=True))
    differences = []
    if len(peer_pos):
        gap = result.features.values[i] - np.median(F.values[peer_pos], axis=0)
        for j in np.argsort(-np.abs(gap), kind="stable")[:3]:
            spec = F.specs[j]
            if spec.role == CATEGORICAL:
                peer_values = [raw_value(F, int(p), j) for p in peer_pos]
                typical = max(peer_values, key=peer_values.count)  # ties: the nearest peer's value
            else:
                typical = float(spec.to_original(magnitudes.median(F.transformed[peer_pos, j])))
            differences.append(PeerDifference(spec.name, raw_value(result.features, i, j), typical,
                                              float(gap[j])))
    return Peers(rows, tuple(differences), pool.source)


def _direction(spec, z: float) -> str:
    if spec.role == CATEGORICAL:
        return "rarer" if z > 0 else "common"
    if abs(z) < TYPICAL_Z:
        return "typical"
    return "higher" if z > 0 else "lower"


SIGNS = {"higher": "+", "lower": "-", "typical": "~", "rarer": "rare", "common": "common"}


def top_features_text(explanation: Explanation, limit: int = 3) -> str:
    """E.g. "amount (+, 61%); hour (+, 22%)" for CSV/Parquet."""
    return "; ".join(f"{t.feature} ({SIGNS[t.direction]}, {t.share:.0%})" for t in explanation.top_features[:limit])


def top_features_texts(result, positions, limit: int = 3) -> list[str]:
    """:func:`top_features_text` of the records at ``positions``, computed for all of them at once from the
    contributions alone (no peers, no smallest change): what a one-row-per-record output needs."""
    positions = np.asarray(positions, dtype=int)
    if len(positions) == 0:
        return []
    contrib = method_contributions(result, positions)
    mean_share = np.mean([shares(np.maximum(v, 0)) for v in contrib.values()], axis=0)
    order = np.argsort(-mean_share, axis=1, kind="stable")[:, :limit]
    Z, specs, names = result.features.values[positions], result.features.specs, result.features.names
    out = []
    for n in range(len(positions)):
        parts = [f"{names[j]} ({SIGNS[_direction(specs[j], Z[n, j])]}, {mean_share[n, j]:.0%})"
                 for j in order[n] if mean_share[n, j] > 0]
        out.append("; ".join(parts))
    return out
