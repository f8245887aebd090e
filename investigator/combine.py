"""Combining the methods: votes, consensus and the flag rule.

Default rule, in one sentence: a record is flagged when at least half of the methods that ran (2 of 4)
put it above their own cutoff. ``consensus`` orders the records: each method's score is standardised to a
robust z-value (see :mod:`investigator.methods.base`), the z-values are averaged leaving out each record's
single lowest one when three or more methods ran, and the mean is put on [0, 1] by the same Gaussian
scaling as the methods' unified scores: max(0, erf(z / sqrt 2)). Averaging before the [0, 1] mapping keeps
the order among very unusual records, where unified scores all sit near 1.

Why it holds up when one method fails: a method that misses the outliers (local_density on data where the
outliers sit together and look dense to each other) withholds one vote, and the other methods still reach
the two votes needed; its low z-value is the one left out of the consensus, so it cannot push a
record down the ranking either. A method that flags far too much cannot flag a record on its own.

With ``contamination`` F, each method flags its top F share of reference scores, and the top ceil(F n)
records by consensus are flagged.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .methods.base import gaussian_scaling


@dataclass
class Combination:
    z: np.ndarray  # the trimmed mean of the methods' z-values; orders records where consensus ties at 1
    votes: np.ndarray
    consensus: np.ndarray
    flagged: np.ndarray
    rule: str
    min_votes: int


def min_votes_for(n_methods: int) -> int:
    return max(1, -(-n_methods // 2))


def rule_sentence(n_methods: int, contamination: float | None) -> str:
    if contamination is not None:
        return (
            f"The {contamination:g} share of records with the highest consensus is flagged; each method "
            f"flags its own top {contamination:g} share."
        )
    need = min_votes_for(n_methods)
    if n_methods == 1:
        return "A record is flagged when the method puts it above its cutoff."
    return (
        f"A record is flagged when at least {need} of the {n_methods} methods put it above their own "
        "cutoff; consensus (0 to 1) orders the records."
    )


def combine(z: dict[str, np.ndarray], flags: dict[str, np.ndarray],
            contamination: float | None = None) -> Combination:
    keys = list(z)
    Z = np.column_stack([z[k] for k in keys])
    votes = np.column_stack([flags[k] for k in keys]).sum(axis=1).astype(int)
    if Z.shape[1] >= 3:  # trimmed: leave out each record's lowest z-value
        zbar = (Z.sum(axis=1) - Z.min(axis=1)) / (Z.shape[1] - 1)
    else:
        zbar = Z.mean(axis=1)
    consensus = gaussian_scaling(zbar)
    need = min_votes_for(len(keys))
    if contamination is None:
        flagged = votes >= need
    else:
        n_flag = int(np.ceil(contamination * len(consensus)))
        flagged = np.zeros(len(consensus), dtype=bool)
        flagged[ranking(zbar)[:n_flag]] = True
    return Combination(zbar, votes, consensus, flagged, rule_sentence(len(keys), contamination), need)


def ranking(z: np.ndarray) -> np.ndarray:
    """Positions ordered from most to least unusual; ties keep file order."""
    return np.argsort(-z, kind="stable")
