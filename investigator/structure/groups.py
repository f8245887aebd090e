"""Small dense groups versus lone outliers, and large clusters of ordinary records ("kinds of normal").

Everything happens in the prepared (robust-scaled) feature space the methods saw, never in the 2-D map,
which distorts density. Clustering is HDBSCAN (Campello, Moulavi & Sander 2013, "Density-based clustering
based on hierarchical density estimates"), scikit-learn's ``HDBSCAN`` labels (computed through
:mod:`investigator.structure.density`, whose core-distance search is quicker in many dimensions), run twice
with different purposes.

1. **Kinds of normal** (large clusters). HDBSCAN with ``min_cluster_size`` = the large-cluster size and
   ``min_samples`` = 10, on a reproducible sample of ``KINDS_SAMPLE`` (5,000) records, or all records when
   there are fewer; so only clusters holding that share of the data can come out. A cluster is *large*
   when it holds at least ``LARGE_SHARE`` (5%) of the records and at least ``LARGE_MIN`` (25): one record
   in 20 is too many to be a pattern of unusual records, and the minimum keeps a tiny table from calling
   a handful of records a kind of normal. Below twice that size no large clusters are looked for.
2. **Small groups**. HDBSCAN with ``min_cluster_size`` = ``min_samples`` = m: 5 from 250 records up
   (scikit-learn's default minimum cluster size; three or four records close together happen by chance
   often enough in larger tables), n // 50 from 150 to 249 records, 3 below (with few records, three alike
   is already notable). ``min_samples`` may not exceed m, or a group of m near-duplicates would be
   measured against records outside it and would not look dense. Up to ``GROUP_SET`` (8,000) records,
   all are clustered; above that, every flagged record (a reproducible ``FLAGGED_CAP``, 4,000, of them
   when there are more) with a reproducible sample of the unflagged ones, ``GROUP_SET`` in all. Flagged
   records are not sampled away, so a small group keeps its size, and the thinned bulk still gives them
   context. A record left out joins a candidate group when it lies within the core distance (HDBSCAN's
   distance to the m-th nearest clustered record, itself counted) of the group's member nearest to it.
   A cluster is a **group** when it has m or more members, fewer than a large cluster, and at least half
   of them flagged: a group is a set of unusual records that sit together, and a dense spot of ordinary
   records is not a finding.

HDBSCAN counts every record that drifts off a cluster after the cluster formed as its member, however far
away it is. So in both runs a member must also be close: its core distance (to its 10th nearest sampled
record for a large cluster, to its (m-1)-th nearest fellow member for a group) must be at most ``FAR``
(3) times the median over the cluster, the median taken as at least ``CLOSE`` (0.1 robust standard
deviations, so that exact duplicates do not make every other distance far). Among 8 Gaussian points that
is exceeded about 1 time in 100 in two dimensions and never seen in five or more (2,000 draws), while a
lone point beside a tight group exceeds it many times over. A record outside the large-cluster sample
takes the large cluster of its nearest sampled record under the same rule.

Each flagged record gets a ``pattern``: ``"group"`` when it is a member of a group, ``"isolated"``
otherwise (no group, or a member of a large cluster: a lone outlier of its kind). Unflagged records get
None. Ids number the groups and large clusters together from 1, by size (largest first) and then by first
member row, so they are stable for a seed; -1 means none. HDBSCAN has no random part; the seed only draws
the samples.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from sklearn.neighbors import NearestNeighbors

from investigator import sampling
from investigator.structure.density import hdbscan_labels
from investigator.structure.kinds import LARGE_SHARE, large_size

FAR = 3.0  # a member at over 3x its cluster's median core distance is not a member
CLOSE = 0.1  # ... with the median taken as at least 0.1 robust SD (exact duplicates have median 0)
GROUP_SET = 8_000
FLAGGED_CAP = 4_000
GROUP = "group"
ISOLATED = "isolated"


def min_group_size(n: int) -> int:
    """Smallest group, m: 3 below 150 records, n // 50 up to 249, 5 from 250 records up."""
    return max(3, min(5, n // 50))


@dataclass
class Grouping:
    """Groups and large clusters found among n records.

    ``group``: per record, the id of its group or large cluster (1, 2, ...; -1 none); ``small_group`` the
    id of its small group only. ``ids``, ``sizes``, ``large`` and ``kinds`` are aligned per id (sizes count all
    records, flagged or not; ``kinds``: the kind of normal, 1, 2, ..., a large cluster is, 0 for a small
    group). ``pattern``: per record, ``"group"`` / ``"isolated"`` for flagged records, None for the others.
    """

    group: np.ndarray
    pattern: np.ndarray
    ids: np.ndarray
    sizes: np.ndarray
    large: np.ndarray
    parameters: dict = field(default_factory=dict)
    notices: list[str] = field(default_factory=list)
    kinds: np.ndarray | None = None

    @property
    def small_group(self) -> np.ndarray:
        """Per record, the id of its small group, -1 for none (a large cluster's members have none)."""
        small = np.isin(self.group, np.asarray(self.small_ids, dtype=self.group.dtype))
        return np.where(small, self.group, -1)

    def size_of(self, gid: int) -> int:
        return int(self.sizes[self.ids == gid][0]) if gid in self.ids else 0

    def is_large(self, gid: int) -> bool:
        return bool(self.large[self.ids == gid][0]) if gid in self.ids else False

    def members(self, gid: int) -> np.ndarray:
        """Rows (0-based) of the records in group or cluster ``gid``."""
        return np.flatnonzero(self.group == gid)

    @property
    def small_ids(self) -> list[int]:
        """Ids of the groups (not the large clusters), largest first."""
        return [int(g) for g, big in zip(self.ids, self.large, strict=True) if not big]

    @property
    def large_ids(self) -> list[int]:
        return [int(g) for g, big in zip(self.ids, self.large, strict=True) if big]

    def record(self, i: int) -> dict:
        """One record's pattern, small group id and its size (None where it is in no small group): a large
        cluster is a kind of normal, the record's ``kind``."""
        gid = int(self.group[i])
        small = gid > 0 and not self.is_large(gid)
        return {"pattern": self.pattern[i], "group": gid if small else None,
                "group_size": self.size_of(gid) if small else None,
                "in_large_cluster": gid > 0 and not small}

    def describe(self) -> dict:
        """For the run record: the rule's parameters, the groups and clusters (a large one with the ``kind``
        it is), and the notices."""
        kinds = self.kinds if self.kinds is not None else np.zeros(len(self.ids), dtype=int)
        return {**self.parameters,
                "groups": [{"group": int(g), "size": int(s), "large": bool(b), **({"kind": int(k)} if b else {})}
                           for g, s, b, k in zip(self.ids, self.sizes, self.large, kinds, strict=True)],
                "notices": list(self.notices)}


def find_groups(X: np.ndarray, flagged: np.ndarray, *, seed: int = 0,
                kind_labels: np.ndarray | None = None) -> Grouping:
    """Find small groups among the records, and each flagged record's pattern.

    Parameters
    ----------
    X : n x p prepared (robust-scaled) features, as ``Features.values``.
    flagged : n booleans, the scan's flags.
    seed : seed of the samples drawn on large data (the same seed gives the same groups).
    kind_labels : per record its kind of normal (0-based, the ``labels`` of
        :func:`investigator.structure.kinds.find_kinds`), or None when the records form one kind; kinds are
        reported as the large clusters.

    Returns
    -------
    Grouping. The rules are in the module docstring.
    """
    X = np.asarray(X, dtype=float)
    flagged = np.asarray(flagged, dtype=bool)
    n = len(X)
    if X.ndim != 2 or flagged.shape != (n,):
        raise ValueError("X must be n x p and flagged must hold n booleans")
    if not np.isfinite(X).all():
        raise ValueError("X must be finite (prepared features have no missing values)")
    m, big = min_group_size(n), large_size(n)
    params: dict[str, Any] = {"min_group_size": m, "large_cluster_size": big, "large_share": LARGE_SHARE,
              "method": "HDBSCAN (Campello, Moulavi & Sander 2013)"}
    notices: list[str] = []
    labels = np.full(n, -1)
    n_large = 0
    if kind_labels is not None:
        labels = np.asarray(kind_labels, dtype=int)
        n_large = int(labels.max()) + 1
    groups = np.full(n, -1)
    if n <= m:
        notices.append(f"only {n} records: no groups looked for (a group needs {m + 1} records or more)")
    elif flagged.any():
        groups, params["group_set"] = _groups(X, flagged, m, big, seed)
        if params["group_set"] < n:
            notices.append(
                f"groups were looked for among {params['group_set']:,} of {n:,} records (every flagged "
                "record and a sample of the others); a record left out joined a group when within the "
                "core distance of the group's member nearest to it"
            )
    # A group is more specific than the large cluster around it, so its label wins.
    final = np.where(groups >= 0, groups + n_large, labels)
    return _number(final, n_large, flagged, params, notices)


def _group_set(X: np.ndarray, flagged: np.ndarray, seed: int) -> np.ndarray:
    """The records clustered for groups: all of them, or every flagged record and a sample of the rest,
    both drawn by content."""
    n = len(flagged)
    if n <= GROUP_SET:
        return np.arange(n)
    flag_rows, other_rows = np.flatnonzero(flagged), np.flatnonzero(~flagged)
    flag_rows = sampling.sample_of(X, flag_rows, FLAGGED_CAP, [seed, 13, 1])
    take = min(len(other_rows), GROUP_SET - len(flag_rows))
    return np.sort(np.concatenate([flag_rows, sampling.sample_of(X, other_rows, take, [seed, 13, 2])]))


def _groups(X: np.ndarray, flagged: np.ndarray, m: int, big: int, seed: int) -> tuple[np.ndarray, int]:
    """Small groups: labels 0..g-1 per record (-1 none), and the number of records clustered."""
    n = len(X)
    rows = _group_set(X, flagged, seed)
    set_labels = hdbscan_labels(X[rows], m, m)
    labels = np.full(n, -1)
    labels[rows] = set_labels
    # Only clusters that can still be groups are carried on. Their flagged share in the set is an upper
    # bound of the share among all records: unflagged records are thinned there, flagged ones are not.
    candidates = []
    for c in range(set_labels.max() + 1):
        in_c = set_labels == c
        if in_c.sum() < big and 2 * flagged[rows[in_c]].sum() >= in_c.sum():
            candidates.append(c)
    if len(rows) < n and candidates:
        members = rows[np.isin(set_labels, candidates)]
        # Core distance as HDBSCAN defines it (min_samples counts the record itself), within the set.
        core = _search(X[rows], m).kneighbors(X[members])[0][:, -1]
        rest = np.setdiff1d(np.arange(n), rows)
        dist, idx = _search(X[members], 1).kneighbors(X[rest])
        joins = dist[:, 0] <= core[idx[:, 0]]
        labels[rest[joins]] = labels[members[idx[joins, 0]]]
    out = np.full(n, -1)
    kept = 0
    for c in candidates:
        members = _close(X, np.flatnonzero(labels == c), m - 1)
        if m <= len(members) < big and 2 * int(flagged[members].sum()) >= len(members):
            out[members] = kept
            kept += 1
    return out, len(rows)


def _close(X: np.ndarray, members: np.ndarray, k: int) -> np.ndarray:
    """The members whose distance to their k-th nearest fellow member is at most ``FAR`` times the
    members' median: HDBSCAN keeps a record that drifts off a cluster late as a member, however far."""
    if len(members) <= k + 1:
        return members
    core = _search(X[members], k).kneighbors(None)[0][:, -1]
    return members[core <= _reach(core)]


def _reach(core: np.ndarray) -> float:
    """The largest core distance a member may have: ``FAR`` times the members' median (at least CLOSE)."""
    return FAR * max(float(np.median(core)), CLOSE)


def _search(X: np.ndarray, k: int):
    """Exact Euclidean k-nearest-neighbour search (brute force: trees are slow in 20 dimensions)."""
    return NearestNeighbors(n_neighbors=k, algorithm="brute").fit(X)


def _number(labels: np.ndarray, n_large: int, flagged: np.ndarray, params: dict,
            notices: list[str]) -> Grouping:
    """Renumber from 1 by size, then first member row; patterns for the flagged records."""
    found = [c for c in np.unique(labels) if c >= 0]
    sizes = {c: int((labels == c).sum()) for c in found}
    first = {c: int(np.argmax(labels == c)) for c in found}
    order = sorted(found, key=lambda c: (-sizes[c], first[c]))
    group = np.full(len(labels), -1)
    for new, c in enumerate(order, start=1):
        group[labels == c] = new
    large = np.array([c < n_large for c in order], dtype=bool)
    small = np.zeros(len(order) + 1, dtype=bool)
    small[1:] = ~large
    in_group = (group > 0) & small[np.maximum(group, 0)]
    pattern = np.full(len(labels), None, dtype=object)
    pattern[flagged] = ISOLATED
    pattern[flagged & in_group] = GROUP
    kinds = np.array([c + 1 if c < n_large else 0 for c in order], dtype=int)  # a large cluster is kind c + 1
    return Grouping(group, pattern, np.arange(1, len(order) + 1),
                    np.array([sizes[c] for c in order], dtype=int), large, params, notices, kinds)
