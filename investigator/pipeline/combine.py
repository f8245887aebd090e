"""Combining the methods: votes, the flag rule, the combined evidence, consensus and rank.

Default rule, in one sentence: a record is flagged when at least half of the methods that ran (2 of 4) put
it above their own cutoff, or when one method puts it far beyond (beyond the far-out fence of that
method's own scores, see :mod:`investigator.methods.base`), or when the combined evidence is far beyond
(beyond the far-out fence of the records' combined z-values). Each flagged record says which: ``votes``,
``far beyond <method>`` or ``far beyond combined``.

Why one method may flag alone: some records only one method can see. A line whose amount is not its
quantity times its unit price is ordinary in every column and in every neighbourhood; only the
covariance-based method sees the broken relation, and it sees it as a distance thousands of times its
cutoff. Requiring a second vote would drop it. The far-out level is set from the method's own scores, so
a method that flags too much on a table (a density method on a lumpy one) raises its own level and still
cannot flag on its own what is merely above its cutoff.

Why the combined evidence may flag: a record well above one method's cutoff and near two others' (a
batch of seven claims just under an approval limit, which form their own small neighbourhood) can rank
among the most unusual records of the table with a single vote. The far-out fence of the combined
z-values, Q3 + 3 IQR (or 6 upper semi-IQR when wider, as for the methods), flags it; on the labelled and
invented tables of the benchmark it added no ordinary record (measured).

Combined evidence ``z``: each method's score as a z-value (the same normal quantile z_q, 1.96 for the
default cutoff 0.975, at every method's cutoff), averaged over the methods leaving out each record's single
lowest z-value when three or more ran: a method that misses a kind of outlier (local_density on outliers
that sit together) withholds one vote and cannot push the record down the order either.

``consensus`` puts z on (0, 1) without saturating: s / (s + s_q), with s = log(1 + e^(4z)) / 4 (a smooth
max(0, z)) and s_q its value at z_q. It is 0.5 at the methods' common cutoff, about 0.08 for a typical
record (z = 0), falls towards 0 below and rises towards 1 only as slowly as the evidence grows (0.91 at
z = 20, 0.99 at z = 200), and is strictly increasing in z, so two records with different evidence never
share a consensus in floating point (an erf-based scale is exactly 1.0 for every z above about 8.3, which
tied the strongest records, and max(0, z) tied every ordinary one at 0). Printed to three decimals close
records can still look alike: ``rank`` is the order itself. ``rank`` orders the records by z, 1 = most
unusual; records with the same z (exact copies) share a rank.

With ``contamination`` F, each method flags its top F share of reference scores, and the top ceil(F n)
records by z are flagged (reason ``top share``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats

from investigator.methods.base import NORMAL_IQR, upper_fence
from investigator.prepare.features import robust_scale

VOTES = "votes"
FAR_BEYOND = "far beyond "
COMBINED = "far beyond combined"
TOP_SHARE = "top share"


@dataclass
class Combination:
    z: np.ndarray  # the combined evidence: trimmed mean of the methods' z-values
    votes: np.ndarray
    consensus: np.ndarray
    rank: np.ndarray  # 1 = most unusual; equal z, equal rank
    flagged: np.ndarray
    reason: np.ndarray  # per record: "votes", "far beyond <method>", "top share", or "" when not flagged
    rule: str
    min_votes: int
    combined_far: float | None = None  # the combined z-value beyond which a record is flagged (None: not used)


def min_votes_for(n_methods: int) -> int:
    return max(1, -(-n_methods // 2))


def rule_sentence(n_methods: int, contamination: float | None) -> str:
    if contamination is not None:
        return (
            f"The {contamination:g} share of records with the highest combined evidence is flagged; each method "
            f"flags its own top {contamination:g} share."
        )
    need = min_votes_for(n_methods)
    if n_methods == 1:
        return "A record is flagged when the method puts it above its cutoff."
    alone = (", when one method puts it far beyond (beyond the far-out fence of its own scores), or when the "
             "combined evidence is far beyond (beyond the far-out fence of all records' combined z-values)"
             if need > 1 else "")
    return (
        f"A record is flagged when at least {need} of the {n_methods} methods put it above their own cutoff"
        f"{alone}; rank (1 = most unusual) and consensus (0 to 1, 0.5 at the cutoffs) order the records."
    )


SHARPNESS = 4.0


def _soft_positive(z) -> np.ndarray:
    return np.logaddexp(0.0, SHARPNESS * np.asarray(z, dtype=float)) / SHARPNESS


def consensus_of(z: np.ndarray, cutoff: float = 0.975) -> np.ndarray:
    """s / (s + s_q) with s = log(1 + e^(4 z)) / 4: 0.5 at the cutoff's normal quantile z_q, strictly
    increasing, in (0, 1) for every finite z."""
    s = _soft_positive(z)
    s_q = float(_soft_positive(stats.norm.ppf(cutoff)))
    return s / (s + s_q)


def rank_of(z: np.ndarray) -> np.ndarray:
    """Competition rank by z, highest first: 1, 2, 2, 4 ... (equal z share the best rank)."""
    z = np.asarray(z, dtype=float)
    order = np.argsort(-z, kind="stable")
    ranks = np.empty(len(z), dtype=np.int64)
    sorted_z = z[order]
    first = np.r_[True, sorted_z[1:] != sorted_z[:-1]]
    start = np.flatnonzero(first)
    ranks[order] = np.repeat(start + 1, np.diff(np.r_[start, len(z)]))
    return ranks


def combined_fence(zbar: np.ndarray) -> float:
    """The far-out fence of combined z-values; where over half of them tie (so the quartiles cannot give a
    width), the width is 1.349 robust spreads of the fallback chain."""
    return upper_fence(zbar, NORMAL_IQR * robust_scale(zbar)[1] if robust_scale(zbar)[2] != "MAD" else 0.0)


def trimmed_mean(Z: np.ndarray) -> np.ndarray:
    """Per row, the mean of the z-values leaving out the lowest when three or more methods ran."""
    if Z.shape[1] >= 3:
        return (Z.sum(axis=1) - Z.min(axis=1)) / (Z.shape[1] - 1)
    return Z.mean(axis=1)


def combine(z: dict[str, np.ndarray], flags: dict[str, np.ndarray], far: dict[str, np.ndarray] | None = None,
            contamination: float | None = None, cutoff: float = 0.975,
            combined_far: float | None = None) -> Combination:
    """Combine per-method z-values and flags. ``far``: per method, the z-value beyond which it flags alone
    (an array per record, or a number); None lets no method flag alone. ``combined_far``: the combined
    z-value beyond which a record is flagged, fitted on reference records (default: on these records,
    :func:`combined_fence`); only with ``far``."""
    keys = list(z)
    Z = np.column_stack([z[k] for k in keys])
    votes = np.column_stack([flags[k] for k in keys]).sum(axis=1).astype(int)
    zbar = trimmed_mean(Z)
    need = min_votes_for(len(keys))
    reason = np.full(len(zbar), "", dtype=object)
    level = None
    if contamination is None:
        by_votes = votes >= need
        flagged = by_votes.copy()
        reason[by_votes] = VOTES
        if far is not None and need > 1:
            beyond = np.column_stack([Z[:, j] > np.broadcast_to(far[k], len(zbar)) for j, k in enumerate(keys)])
            alone = beyond.any(axis=1) & ~by_votes
            for i in np.flatnonzero(alone):
                reason[i] = FAR_BEYOND + ", ".join(k for j, k in enumerate(keys) if beyond[i, j])
            flagged |= alone
            level = combined_fence(zbar) if combined_far is None else combined_far
            together = (zbar > max(level, float(stats.norm.ppf(cutoff)))) & ~flagged
            reason[together] = COMBINED
            flagged |= together
    else:
        n_flag = int(np.ceil(contamination * len(zbar)))
        flagged = np.zeros(len(zbar), dtype=bool)
        flagged[ranking(zbar)[:n_flag]] = True
        reason[flagged] = TOP_SHARE
    return Combination(zbar, votes, consensus_of(zbar, cutoff), rank_of(zbar), flagged, reason,
                       rule_sentence(len(keys), contamination), need, level)


def ranking(z: np.ndarray) -> np.ndarray:
    """Positions ordered from most to least unusual; ties keep file order."""
    return np.argsort(-z, kind="stable")
