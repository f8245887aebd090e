"""Kinds of normal: large clusters of ordinary records, each judged by a fit of its own.

Two kinds of trip (a day trip and an overnight one) are not outliers of each other. When the records form
two or more large clusters, every method judges each record within its kind. Four steps:

1. **Candidates.** HDBSCAN (Campello, Moulavi & Sander 2013; scikit-learn's ``HDBSCAN`` labels, through
   :mod:`investigator.structure.density`) with ``min_cluster_size`` = the large-cluster size (5% of the
   records, at least 25) and ``min_samples`` = 10, on a sample of up to ``SAMPLE`` (5,000) records drawn by
   content. HDBSCAN finds the dense core of each cluster, not its shell.
2. **Every record to the kind it is nearest to**, iterated as in trimmed model-based clustering (TCLUST:
   Garcia-Escudero, Gordaliza, Matran & Mayo-Iscar 2008, "A general trimming approach to robust cluster
   analysis", Annals of Statistics 36(3)): fit one MCD per kind on its members (MRCD where a kind's core is
   singular, see :mod:`investigator.methods.mcd`), give every record to the kind it is nearest to in
   TCLUST's sense (the largest log share - log det / 2 - squared robust distance / 2: the kind under whose
   fit it is most likely), refit each kind on all its members by concentration steps from its previous
   fit, and repeat until no record changes kind (at most ``ROUNDS``). Nearest by distance alone would hand
   every outlier to the widest kind. A kind left with fewer members than a large
   cluster is dissolved and its records go to their nearest remaining kind. The trimming of TCLUST is the
   MCD's own: each kind's fit rests on its most concentrated members and its outliers do not move it.
   Finally, on every record (not only the sample): assignment, one full multi-start MCD per kind on all its
   members, and the assignment again.
3. **Only distinct clusters.** Two kinds are distinct when at most ``OVERLAP`` (10%) of the members of
   either lie within the other's ordinary region (its chi-square 0.975 ellipse); otherwise the pair whose
   ranges overlap most is merged, refitted and reassigned, until every pair is distinct or one kind is
   left. A tight knot of identical records inside a wide population is not a second kind, nor is a
   population split by a density threshold; two clusters whose ellipses do not meet are.
4. **Only real clusters.** A density method finds "clusters" in any large sample of one population
   (a uniform cube, a Gaussian split along a hyperplane). The kinds are kept only when they describe the
   records better than one fit does by the Bayesian information criterion (Schwarz 1978) of the
   classification likelihood, each record counted under its own kind, sum of log(n_k / n) + log of the
   normal density of its kind's fit, the ``TRIM`` (5%) of records that fit worst left out of both sums as
   TCLUST trims them; each kind costs p + p(p+1)/2 parameters and a share. Splitting one normal population
   in two lowers this likelihood (the halves' smaller spread does not make up for log 1/2 per record), so
   one population stays one kind.

The model keeps each kind's fit; per-kind cutoffs of every method live in :class:`KindCalibration` objects,
and nothing here changes a fitted method.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import stats

from investigator import sampling
from investigator.methods.base import Scale
from investigator.methods.fitted import owned, read_only
from investigator.methods.mcd import FastMCD, MCDFit, sq_distances
from investigator.structure.density import hdbscan_labels

LARGE_SHARE = 0.05
LARGE_MIN = 25
MIN_SAMPLES = 10
SAMPLE = 5_000
ROUNDS = 20
TRIM = 0.05
OVERLAP = 0.10


def large_size(n: int) -> int:
    """Smallest large cluster among n records: 5% of them, and at least 25."""
    return max(math.ceil(LARGE_SHARE * n), LARGE_MIN)


@dataclass(frozen=True)
class KindsOfNormal:
    """Large clusters of ordinary records: one robust fit per kind, on the robust_distance features.

    ``fits``: one :class:`MCDFit` per kind; ``columns``: the feature columns the fits use; ``labels``: the
    kind (0-based) of every scanned record; ``parameters``: the run record's view. Read-only once built:
    scoring new records makes a copy with their labels (``dataclasses.replace``), never changes this one.
    """

    fits: tuple[MCDFit, ...]
    columns: np.ndarray
    labels: np.ndarray
    parameters: dict = field(default_factory=dict)
    shares: tuple[float, ...] = ()  # each kind's share of the records the kinds were fitted on

    def __post_init__(self) -> None:
        read_only(self.columns)
        read_only(self.labels)

    @property
    def n_kinds(self) -> int:
        return len(self.fits)

    def distances(self, X: np.ndarray) -> np.ndarray:
        """n x K squared robust distances of the records to every kind's fit."""
        Xc = np.asarray(X, dtype=float)[:, self.columns]
        return np.column_stack([sq_distances(Xc, f.location, f.covariance) for f in self.fits])

    def assign(self, X: np.ndarray) -> np.ndarray:
        """The kind each record belongs to: the one under whose fit it is most likely (TCLUST's rule)."""
        return _nearest(np.asarray(X, dtype=float)[:, self.columns], list(self.fits), self.shares)

    def members(self, k: int) -> np.ndarray:
        return np.flatnonzero(self.labels == k)

    def sizes(self) -> list[int]:
        return [int((self.labels == k).sum()) for k in range(self.n_kinds)]

    def describe(self) -> dict:
        return {**self.parameters, "sizes": self.sizes()}

    def refit(self, X: np.ndarray, rows: np.ndarray, mcd: FastMCD) -> KindsOfNormal:
        """The kinds refitted on the records at ``rows`` only (a resampled run): each kind's fit by
        concentration steps from its current one on its members among them; labels for every record."""
        Xc = np.asarray(X, dtype=float)[:, self.columns]
        in_rows = np.zeros(len(Xc), dtype=bool)
        in_rows[rows] = True
        fits = []
        for k, f in enumerate(self.fits):
            members = Xc[in_rows & (self.labels == k)]
            fits.append(mcd.concentrate(members, f, spread_of=Xc[rows]) if len(members) > 2 * len(self.columns) + 2
                        else f)
        return KindsOfNormal(tuple(fits), self.columns, _nearest(Xc, fits, self.shares), self.parameters,
                             self.shares)


@dataclass(frozen=True)
class KindCalibration:
    """One method's :class:`Scale` per kind of normal; fitted once, read by every scoring."""

    scales: tuple[Scale, ...]

    def apply(self, method, scores: np.ndarray, labels: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(z, flags, cutoffs) of records of the given kinds."""
        z = np.empty(len(scores))
        flags = np.zeros(len(scores), dtype=bool)
        cutoffs = np.empty(len(scores))
        for k, scale in enumerate(self.scales):
            rows = labels == k
            z[rows] = method.standardise(scores[rows], scale)
            flags[rows] = method.flags(scores[rows], scale)
            cutoffs[rows] = scale.cutoff
        return z, flags, cutoffs

    def far(self, labels: np.ndarray) -> np.ndarray:
        return np.array([s.far for s in self.scales])[labels]


def calibrate_kinds(method, scores: np.ndarray, labels: np.ndarray) -> KindCalibration:
    """Each kind's scale, fitted on the scores of all its members."""
    return KindCalibration(tuple(method.calibrate(scores[labels == k]) for k in range(int(labels.max()) + 1)))


def find_kinds(X: np.ndarray, columns: np.ndarray, mcd: FastMCD, *, seed: int = 0,
               notices: list[str] | None = None, candidates: np.ndarray | None = None) -> KindsOfNormal | None:
    """The kinds of normal among the records of X (prepared features), or None when there are fewer than
    two real large clusters. ``columns``: the features the fits use; ``mcd``: how to fit them.
    ``candidates``: the kind of every record of X as another fit found it (a peer-group segment carries the
    whole table's kinds); they replace step 1's HDBSCAN candidates, a kind with fewer members here than a large
    cluster counting as unassigned, and steps 2-4 judge them on these records as they judge HDBSCAN's."""
    X = np.asarray(X, dtype=float)
    n = len(X)
    big = large_size(n)
    if n < 2 * big or len(columns) == 0:
        return None
    keys = sampling.record_keys(X)
    rows = sampling.sample(X, SAMPLE, [seed, 11], keys)
    Xs = X[rows][:, columns]
    big_s = large_size(len(rows))
    if candidates is None:
        labels = hdbscan_labels(Xs, big_s, min(MIN_SAMPLES, len(Xs) - 1))
    else:
        labels = _carried(np.asarray(candidates)[rows], big_s)
    if labels.max() < 1:
        return None
    # While the kinds are found, fits start from fewer random starts (each is refined by concentration steps
    # and refitted in full at the end).
    quick = FastMCD(n_starts=max(50, mcd.n_starts // 10), seed=mcd.seed, sample_above=mcd.sample_above)
    fits = [quick.fit(Xs[labels == c], spread_of=Xs) for c in range(labels.max() + 1)]
    labels, fits, rounds = _concentrate(Xs, labels, fits, mcd, big_s)
    merged = 0
    while len(fits) >= 2:  # kinds whose ordinary regions overlap are one kind: merge the worst pair
        overlap = _overlap(Xs, labels, fits)
        np.fill_diagonal(overlap, 0.0)
        pair = np.maximum(overlap, overlap.T)
        a, b = np.unravel_index(np.argmax(pair), pair.shape)
        if pair[a, b] <= OVERLAP:
            break
        labels = np.where(labels == b, a, labels)
        labels = np.unique(labels, return_inverse=True)[1]
        fits = [quick.fit(Xs[labels == k], spread_of=Xs) for k in range(labels.max() + 1)]
        labels, fits, more = _concentrate(Xs, labels, fits, mcd, big_s)
        rounds += more
        merged += 1
    if len(fits) < 2:
        if notices is not None and merged:
            notices.append("dense regions were found, but their ordinary ranges overlap; they are treated as one "
                           "kind of normal")
        return None
    bic_kinds, bic_one = _bic(Xs, labels, fits), _bic(Xs, np.zeros(len(Xs), dtype=int), [quick.fit(Xs)])
    params = {"method": ("HDBSCAN candidates" if candidates is None else "the whole table's kinds as candidates")
              + ", nearest-kind concentration steps (TCLUST), BIC against one fit",
              "large_cluster_size": big, "sample": int(len(rows)), "rounds": rounds,
              "bic_kinds": float(bic_kinds), "bic_one": float(bic_one), "merged": merged}
    if not bic_kinds < bic_one:
        if notices is not None:
            notices.append(f"{len(fits)} dense regions were found but one fit describes the records better "
                           "(BIC); they are treated as one kind of normal")
        return None
    Xc = X[:, columns]
    if len(rows) < n:  # carry the kinds to every record: assign, refit on all members, assign again
        labels = _nearest(Xc, fits, _shares(labels, len(fits)))
    fits = [mcd.fit(Xc[labels == k], spread_of=Xc) for k in range(len(fits))]
    shares = _shares(labels, len(fits))
    labels = _nearest(Xc, fits, shares)
    return KindsOfNormal(tuple(fits), owned(columns), labels, params, shares)


def _carried(labels: np.ndarray, big: int) -> np.ndarray:
    """Candidate labels carried from another fit: kinds with at least ``big`` members here, numbered 0, 1, ...;
    the members of smaller ones -1 (as HDBSCAN's noise: the concentration steps give them a kind)."""
    counts = np.bincount(labels[labels >= 0]) if (labels >= 0).any() else np.zeros(0, dtype=int)
    number = np.full(len(counts) + 1, -1, dtype=int)
    kept = np.flatnonzero(counts >= big)
    number[kept] = np.arange(len(kept))
    return number[np.where(labels >= 0, labels, len(counts))]


def _shares(labels: np.ndarray, k: int) -> tuple[float, ...]:
    counts = np.bincount(labels[labels >= 0], minlength=k)[:k].astype(float)
    return tuple(float(c) for c in counts / counts.sum())


def _nearest(Xc: np.ndarray, fits: list[MCDFit], shares=None) -> np.ndarray:
    """The kind each record belongs to: argmax over kinds of log(share) - log det(S) / 2 - d^2 / 2, TCLUST's
    discriminant (the kind under whose normal fit the record is most likely). A plain smallest distance
    would hand every outlier to the widest kind, whose cutoffs are then set by absorbed outliers."""
    shares = np.full(len(fits), 1.0 / len(fits)) if not shares else np.asarray(shares, dtype=float)
    score = np.column_stack([
        np.log(max(w, 1e-12)) - 0.5 * np.linalg.slogdet(f.covariance)[1]
        - 0.5 * sq_distances(Xc, f.location, f.covariance)
        for f, w in zip(fits, shares, strict=True)])
    return np.argmax(score, axis=1)


def _concentrate(Xs, labels, fits, mcd: FastMCD, big: int):
    """Nearest-kind assignment and refits until no record changes kind; small kinds dissolved."""
    for rounds in range(1, ROUNDS + 1):
        shares = _shares(labels, len(fits)) if labels.max() < len(fits) else None
        new = _nearest(Xs, fits, shares)
        counts = np.bincount(new, minlength=len(fits))
        while len(fits) > 1 and counts.min() < big:  # dissolve the smallest kind, reassign its records
            drop = int(np.argmin(counts))
            fits.pop(drop)
            kept = np.delete(counts, drop).astype(float)
            new = _nearest(Xs, fits, tuple(kept / kept.sum()))
            counts = np.bincount(new, minlength=len(fits))
        if len(fits) < 2 or (len(new) == len(labels) and np.array_equal(new, labels)):
            return new, fits, rounds
        labels = new
        fits = [mcd.concentrate(Xs[labels == k], f, spread_of=Xs) for k, f in enumerate(fits)]
    return labels, fits, ROUNDS


def _overlap(Xc: np.ndarray, labels: np.ndarray, fits: list[MCDFit]) -> np.ndarray:
    """K x K: the share of kind a's members that lie within kind b's chi-square 0.975 ellipse."""
    q = stats.chi2.ppf(0.975, Xc.shape[1])
    D = np.column_stack([sq_distances(Xc, f.location, f.covariance) for f in fits])
    return np.array([[float((D[labels == a, b] <= q).mean()) for b in range(len(fits))] for a in range(len(fits))])


def _bic(Xc: np.ndarray, labels: np.ndarray, fits: list[MCDFit]) -> float:
    """BIC of the trimmed classification likelihood of normal fits (lower is better)."""
    n, p = Xc.shape
    loglik = np.empty(n)
    for k, f in enumerate(fits):
        rows = labels == k
        _, logdet = np.linalg.slogdet(f.covariance)
        d2 = sq_distances(Xc[rows], f.location, f.covariance)
        loglik[rows] = np.log(rows.mean()) - 0.5 * (p * np.log(2 * np.pi) + logdet + d2)
    kept = np.sort(loglik)[int(np.floor(TRIM * n)):]
    n_params = len(fits) * (p + p * (p + 1) / 2) + (len(fits) - 1)
    return float(-2.0 * kept.sum() + n_params * np.log(n))
