"""Minimum Covariance Determinant: FastMCD with many starts, exact enumeration on tiny data.

Rousseeuw, P. J. & Van Driessen, K. (1999). A fast algorithm for the minimum covariance determinant
estimator. Technometrics 41(3), 212-223.

The raw MCD is the mean and covariance of the h records whose covariance has the smallest determinant.
FastMCD reaches it by concentration steps (C-steps): from a candidate subset, compute its mean and
covariance, keep the h records closest to it in Mahalanobis distance, repeat; the determinant never grows.
The result depends on where the C-steps start, so we start from many random (p+1)-subsets, keep the best
candidates and iterate them to convergence, and keep the smallest determinant. When all h-subsets can be
enumerated cheaply, we enumerate them and return the exact MCD. The starts are drawn on the records in the
order of their content (:func:`investigator.sampling.canonical_order`), so the fit is the same for any
order of the rows.

**A singular core.** With ties, integer codes or exact copies, more than h records can lie on one
hyperplane (or at one point): every h-subset of them has a singular covariance and the MCD does not exist.

* The core is then found as the minimum regularized covariance determinant finds it (MRCD; Boudt,
  Rousseeuw, Vanduffel & Verdonck 2020, "The minimum regularized covariance determinant estimator",
  Statistics and Computing 30): the covariance of an h-subset H is replaced by K(H) = rho T + (1 - rho)
  S(H), with T the identity (the features are robust-scaled, so T is a spread of one robust standard
  deviation per feature) and rho the smallest value that keeps the condition number of K at most
  ``KAPPA`` = 50, the paper's default; the C-steps minimise det K(H). rho is chosen on the h records
  nearest the coordinatewise median, the search runs with it, and it is chosen again on the best subset
  for the final concentration steps.
* The scatter that distances are then measured with is not K(H): the condition-number rule adds rho to
  every direction, and so blurs a relation between columns that holds to the cent (amount = quantity x
  unit price), which is what only this method can see.

**Degenerate directions.** Whether or not the search needed the MRCD, the raw scatter is S(H) with each
direction in which it is degenerate given the spread that all the records have along it
(:func:`fill_degenerate`): a direction where the core's variance is below 1/1000 of the table's robust
spread there (the fallback chain of :func:`investigator.prepare.features.robust_scale` applied to the records'
projections) is one where ties put the core on a point, not one the data are tight in; there the table's
own spread is used. A direction in which the whole table is tight (an exact relation between columns)
keeps the core's variance. The reweighting step then takes the records within the chi-square cutoff of
that raw fit as usual, and their covariance is checked in the same way. On continuous data no direction
is degenerate and the fit is the plain reweighted MCD.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import combinations
from math import comb

import numpy as np
from scipy import stats
from scipy.linalg import solve_triangular

from investigator import sampling
from investigator.methods.fitted import read_only
from investigator.prepare.features import robust_scale

# Records; above SAMPLE_ABOVE the raw MCD is searched on a random sample of SAMPLE_SIZE (not with exact), the
# switch of the neighbour search. Measured with benchmarks/switch_points.py (20 features, 1% planted outliers,
# easy and hard): robust_distance's AUC with a 20,000 sample equals that of the search on all records at 30,000
# and 50,000 records and that of a 50,000 sample at 100,000 (to 4 decimals), and the 50,000-record scan took
# 22.0 s of CPU with the search on all records, 7.8 s with the sample (hard set; 2 cores shared with other work).
SAMPLE_ABOVE = 20_000
SAMPLE_SIZE = 20_000
ENUMERATE_AT_MOST = 5000  # h-subsets; below this the exact MCD is cheaper than the search
SUBSAMPLE = 1500  # FastMCD draws its starts on a subsample of this size for large n (paper: 5 x 300)
PART = 300  # ... split into parts of this size
SMALL_DATA_STARTS = 3  # up to 2 x PART records, the starts are multiplied by this
FINAL_BEST = 3  # candidates iterated to convergence on all records of a large table
_RCOND = 1e-12
_FILL_FLOOR = 1e-10
DEGENERATE = 1e-3  # a direction where the core's variance is below this share of the table's is degenerate
KAPPA = 50.0  # MRCD: the largest condition number of a regularised covariance (Boudt et al. 2020's default)
_BATCH = 50  # starts whose C-steps run together as one batch of array operations


@dataclass(frozen=True)
class MCDFit:
    """A finished fit: scoring and the kinds of normal only read it (its arrays are read-only)."""

    location: np.ndarray  # reweighted
    covariance: np.ndarray  # reweighted, consistency corrected
    raw_location: np.ndarray
    raw_covariance: np.ndarray  # of the best h-subset, maximum likelihood (divided by h)
    raw_support: np.ndarray  # bool mask of the best h-subset
    support: np.ndarray  # bool mask of the records kept by reweighting
    raw_logdet: float
    h: int
    exact: bool
    rho: float  # MRCD weight of the target in the core search: 0 unless the core was singular
    sample: int | None = None  # records the raw fit was searched on, when a sample (None: all records)
    filled: int = 0  # directions of the raw scatter in which the core is singular, given the records' spread
    reweighted_filled: int = 0  # the same for the reweighted covariance

    def __post_init__(self) -> None:
        for array in (self.location, self.covariance, self.raw_location, self.raw_covariance, self.raw_support,
                      self.support):
            read_only(array)

    @property
    def regularised(self) -> bool:
        return self.rho > 0 or self.filled > 0 or self.reweighted_filled > 0


def _mean_cov(X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    mu = X.mean(axis=0)
    D = X - mu
    return mu, D.T @ D / len(X)


def _logdet(S: np.ndarray) -> float:
    sign, logdet = np.linalg.slogdet(S)
    return logdet if sign > 0 else -np.inf


def sq_distances(X: np.ndarray, mu: np.ndarray, S: np.ndarray) -> np.ndarray:
    """Squared Mahalanobis distances through a Cholesky solve (S must be positive definite)."""
    L = np.linalg.cholesky(S)
    Z = solve_triangular(L, (X - mu).T, lower=True, check_finite=False)
    return np.einsum("ij,ij->j", Z, Z)


def _regularised(S: np.ndarray, ridge: float) -> np.ndarray:
    return S + ridge * np.eye(len(S)) if ridge else S


def mrcd_rho(S: np.ndarray, kappa: float = KAPPA) -> float:
    """The smallest rho in [0, 1] with cond(rho I + (1 - rho) S) <= kappa (Boudt et al. 2020): with the
    eigenvalues l1 >= ... >= lp of S, rho = a / (kappa - 1 + a) for a = l1 - kappa lp > 0, else 0; 1 when
    S is zero."""
    w = np.linalg.eigvalsh(S)
    top, low = float(w[-1]), float(max(w[0], 0.0))
    if top <= 0:
        return 1.0
    a = top - kappa * low
    return 0.0 if a <= 0 else a / (kappa - 1.0 + a)


def mrcd_covariance(S: np.ndarray, rho: float) -> np.ndarray:
    return rho * np.eye(len(S)) + (1.0 - rho) * S if rho else S


def fill_degenerate(S: np.ndarray, X: np.ndarray, table: np.ndarray | None = None) -> tuple[np.ndarray, int]:
    """S with every direction in which it is degenerate given the records' own spread there.

    A direction u (an eigenvector of S, variance lambda) is degenerate when lambda is below ``DEGENERATE``
    (1/1000) of v = the squared robust spread of all records of X projected on u (the fallback chain of
    :func:`investigator.prepare.features.robust_scale`): the core has (almost) no spread where the table has plenty,
    as when over half the records share a value (zero discount, code 1). Its variance becomes v. A direction
    in which the table itself is tight (amount = quantity x unit price, to the cent) is not degenerate, and
    keeps the core's variance. ``table``: further records (the whole table, for a kind of normal fitted on
    its members); the larger of the two spreads is used, so a column constant within a kind is judged on
    the table's spread, and one that varies within the kind but not in its core on the kind's own. Returns
    the filled matrix and the number of directions filled.
    """
    w, V = np.linalg.eigh(S)
    proj = X @ V
    floor = _FILL_FLOOR * max(float(w[-1]), 1.0)
    spread = np.array([robust_scale(proj[:, j])[1] ** 2 for j in range(V.shape[1])])
    if table is not None:
        wide = np.asarray(table, dtype=float) @ V
        spread = np.maximum(spread, [robust_scale(wide[:, j])[1] ** 2 for j in range(V.shape[1])])
    degenerate = w < DEGENERATE * spread
    if not degenerate.any() and w.min() > floor:
        return S, 0
    # Floored far below any real spread: a direction in which every record agrees stays tight, and the
    # matrix stays positive definite.
    w = np.where(degenerate, np.maximum(spread, floor), np.maximum(w, floor))
    filled = (V * w) @ V.T
    return (filled + filled.T) / 2, int(degenerate.sum())


def _ridge_of(rho: float) -> float:
    """The C-steps' ridge r with S + r I proportional to rho I + (1 - rho) S (the same order of distances
    and of determinants)."""
    return 1e12 if rho >= 1.0 else rho / (1.0 - rho)


def _is_singular(S: np.ndarray) -> bool:
    w = np.linalg.eigvalsh(S)
    return w[0] <= _RCOND * max(w[-1], np.finfo(float).tiny)


class FastMCD:
    """Raw and reweighted MCD of a data matrix.

    Parameters
    ----------
    support_fraction : h / n; default (n + p + 1) / (2n), the highest breakdown point.
    n_starts : random (p+1)-subsets to start C-steps from (the paper uses 500); 0: DetMCD's deterministic
        starts alone (Hubert, Rousseeuw & Verdonck 2012), each iterated on every record.
    n_best : candidates iterated to convergence.
    seed : seed for the starts; the same seed gives the same fit.
    sample_above, sample_size : above ``sample_above`` records the raw MCD (the h-subset search) runs on a
        reproducible random sample of ``sample_size`` of them; the consistency correction and the
        reweighting then use every record. The raw fit of a random sample estimates the same location and
        scatter, with a standard error that shrinks as 1/sqrt(sample) (Rousseeuw & Van Driessen 1999 note
        that the location and scatter are asymptotically normal); ``sample_above=None`` never samples.
    """

    def __init__(self, support_fraction: float | None = None, n_starts: int = 500, n_best: int = 10,
                 seed: int = 0, sample_above: int | None = SAMPLE_ABOVE, sample_size: int = SAMPLE_SIZE) -> None:
        self.support_fraction = support_fraction
        self.n_starts = n_starts
        self.n_best = n_best
        self.seed = seed
        self.sample_above = sample_above
        self.sample_size = sample_size

    def h_for(self, n: int, p: int) -> int:
        if self.support_fraction is None:
            return (n + p + 1) // 2
        return int(np.clip(np.ceil(self.support_fraction * n), p + 1, n))

    def fit(self, X: np.ndarray, *, enumerate_at_most: int = ENUMERATE_AT_MOST,
            spread_of: np.ndarray | None = None) -> MCDFit:
        """The reweighted MCD of X. ``spread_of``: the records whose spread fills a degenerate direction
        (default X itself; a kind of normal passes the whole table, so that a column constant within the
        kind is judged on the table's spread)."""
        X = np.asarray(X, dtype=float)
        spread_of = None if spread_of is None else np.asarray(spread_of, dtype=float)
        n, p = X.shape
        if self.sample_above is not None and n > self.sample_above:
            rows = sampling.sample(X, self.sample_size, [self.seed, 17])
            raw = FastMCD(self.support_fraction, self.n_starts, self.n_best, self.seed, None).fit(X[rows])
            mask = np.zeros(n, dtype=bool)
            mask[rows[raw.raw_support]] = True
            return self._reweight(X, raw.raw_location, raw.raw_covariance, mask, raw.raw_logdet, raw.h,
                                  raw.rho, sample=len(rows), filled=raw.filled, spread_of=spread_of)
        # The starts are drawn on the records in content order: the fit cannot depend on the row order.
        order = sampling.canonical_order(X)
        Xs = X[order]
        h = self.h_for(n, p)
        exact = n <= 40 and comb(n, h) <= enumerate_at_most  # comb() itself is slow for large n
        rho = 0.0
        try:
            subset = self._enumerate(Xs, h, 0.0) if exact else self._search(Xs, h, 0.0)
            mu, S = _mean_cov(Xs[subset])
            if _is_singular(S):
                raise _Singular
        except _Singular:
            # More than h records on one hyperplane: the MRCD. rho from the h records nearest the
            # coordinatewise median, a search with it, then rho again from the best subset.
            start = np.argsort(np.sum((Xs - np.median(Xs, axis=0)) ** 2, axis=1), kind="stable")[:h]
            rho = max(mrcd_rho(_mean_cov(Xs[start])[1]), 1e-6)
            subset = self._enumerate(Xs, h, _ridge_of(rho)) if exact else self._search(Xs, h, _ridge_of(rho))
            rho = max(mrcd_rho(_mean_cov(Xs[subset])[1]), 1e-6)
            if not exact:
                subset = np.array(self._converge(Xs, subset, h, _ridge_of(rho))[1], dtype=np.intp)
            mu, S = _mean_cov(Xs[subset])
        raw_S, filled = fill_degenerate(S, X, spread_of)
        mask = np.zeros(n, dtype=bool)
        mask[order[subset]] = True
        return self._reweight(X, mu, raw_S, mask, _logdet(mrcd_covariance(S, rho)), h, rho, filled=filled,
                              spread_of=spread_of, exact=exact)

    def concentrate(self, X: np.ndarray, start: MCDFit, spread_of: np.ndarray | None = None) -> MCDFit:
        """The MCD of X reached by concentration steps from an earlier fit (its h closest records of X
        first), without new random starts: how a kind of normal is refitted after its members change.
        Its regularisation, if any, is chosen again on the subset reached."""
        X = np.asarray(X, dtype=float)
        spread_of = None if spread_of is None else np.asarray(spread_of, dtype=float)
        order = sampling.canonical_order(X)
        Xs = X[order]
        n, p = Xs.shape
        h = self.h_for(n, p)
        first = np.argsort(sq_distances(Xs, start.raw_location, start.raw_covariance), kind="stable")[:h]
        rho = start.rho
        try:
            if rho:
                raise _Singular
            subset = np.array(self._converge(Xs, first, h, 0.0)[1], dtype=np.intp)
            mu, S = _mean_cov(Xs[subset])
            if _is_singular(S):
                raise _Singular
            rho = 0.0
        except _Singular:
            rho = max(mrcd_rho(_mean_cov(Xs[first])[1]), 1e-6)
            subset = np.array(self._converge(Xs, first, h, _ridge_of(rho))[1], dtype=np.intp)
            rho = max(mrcd_rho(_mean_cov(Xs[subset])[1]), 1e-6)
            mu, S = _mean_cov(Xs[subset])
        raw_S, filled = fill_degenerate(S, X, spread_of)
        mask = np.zeros(n, dtype=bool)
        mask[order[subset]] = True
        return self._reweight(X, mu, raw_S, mask, _logdet(mrcd_covariance(S, rho)), h, rho, filled=filled,
                              spread_of=spread_of)

    def _reweight(self, X, mu, raw_S, mask, raw_logdet, h, rho, sample=None, filled=0, spread_of=None,
                  exact: bool = False) -> MCDFit:
        """Consistency correction and reweighting of a raw fit, over every record of X."""
        p = X.shape[1]
        d2 = sq_distances(X, mu, raw_S)
        # Consistency: scale so the median distance matches the chi-square median (as scikit-learn does).
        # A median of 0 (over half the records at the raw centre itself) leaves the scale as it is; so does a
        # median at the level of rounding (over half the records at the centre but for 1e-160 in a column
        # whose spread is 1e200: dividing by it overflowed).
        med = float(np.median(d2))
        chi2_median = stats.chi2.ppf(0.5, p)
        factor = med / chi2_median if med > _RCOND * chi2_median else 1.0
        raw_corrected = raw_S * factor
        d2 = d2 / factor
        q = stats.chi2.ppf(0.975, p)
        keep = d2 <= q
        loc, cov = _mean_cov(X[keep])
        # Records kept inside the 0.975 ellipsoid have a smaller covariance than the whole normal
        # population; this factor undoes that truncation (Croux & Haesbroeck 1999, consistency factor).
        cov = cov * (0.975 / stats.chi2.cdf(q, p + 2))
        cov, rw_filled = fill_degenerate(cov, X, spread_of)
        return MCDFit(loc, cov, mu, raw_corrected, mask, keep, raw_logdet, h, exact, rho, sample, filled, rw_filled)

    @staticmethod
    def _enumerate(X: np.ndarray, h: int, ridge: float) -> np.ndarray:
        best: np.ndarray | None = None
        best_det = np.inf
        for subset in combinations(range(len(X)), h):
            idx = np.fromiter(subset, dtype=np.intp, count=h)
            det = np.linalg.det(_regularised(_mean_cov(X[idx])[1], ridge))
            if det < best_det:
                best, best_det = idx, det
        if best is None:  # no determinant below infinity (undefined everywhere): as for a singular core
            raise _Singular
        return best

    def _search(self, X: np.ndarray, h: int, ridge: float) -> np.ndarray:
        """The best h-subset found from the random starts (positions into X, which is in content order)."""
        rng = np.random.default_rng([self.seed, 11])
        n, p = X.shape
        if n <= 2 * PART or not self.n_starts:
            # Random starts are cheap on small data: three times as many (with 500, 1 seed in 30 missed the
            # Hawkins-Bradu-Kass optimum, measured; with 1,500 none of 30 did). With none (DetMCD alone), the
            # fixed starts below decide, each on every record, whatever n is.
            candidates = self._starts(X, h, SMALL_DATA_STARTS * self.n_starts, rng, ridge)
            sub = None
        else:
            # The paper's nested scheme for large n: a random subsample of up to 1,500 records split into
            # up to 5 parts of 300; the starts are shared out over the parts, the 10 best of each part are
            # refined on the merged subsample, and its 10 best are carried to all records.
            sub = np.sort(rng.choice(n, size=min(n, SUBSAMPLE), replace=False))
            parts = np.array_split(rng.permutation(len(sub)), max(1, len(sub) // PART))
            h_sub = int(np.ceil(len(sub) * h / n))
            merged = []
            for part in parts:
                h_part = int(np.ceil(len(part) * h / n))
                for _, subset in self._starts(X[sub[part]], h_part, self.n_starts // len(parts), rng, ridge):
                    merged.append(part[np.array(subset)])
            candidates = []
            Xs = X[sub]
            merged += _deterministic_starts(Xs, h_sub)  # on the subsample: they compete as the random ones do
            for subset in merged:
                for _ in range(2):
                    subset, logdet = self._c_step(Xs, subset, h_sub, ridge)
                candidates.append((logdet, tuple(np.sort(subset))))
        if not candidates and self.n_starts:  # with no random starts (DetMCD alone) the fixed starts decide
            raise _Singular
        candidates = sorted(set(candidates))[: self.n_best]
        if sub is None:
            fixed = [self._converge(X, start, h, ridge) for start in _deterministic_starts(X, h)]
            best = [self._converge(X, np.array(s, dtype=np.intp), h, ridge) for _, s in candidates]
            return np.array(min(best + fixed)[1], dtype=np.intp)
        # Carry the subsample's candidates to all records with two C-steps each, then iterate only the
        # best few to convergence: on large data each step costs a pass over every record.
        carried = []
        for _, subset in candidates:
            subset, _ = self._c_step(X, sub[np.array(subset, dtype=np.intp)], h, ridge)
            subset, logdet = self._c_step(X, subset, h, ridge)
            carried.append((logdet, tuple(np.sort(subset))))
        carried = sorted(set(carried))[:FINAL_BEST]
        best = [self._converge(X, np.array(s, dtype=np.intp), h, ridge) for _, s in carried]
        return np.array(min(best)[1], dtype=np.intp)

    def _starts(self, Xs: np.ndarray, hs: int, n_starts: int, rng, ridge: float) -> list:
        """Random starts with two C-steps each, batched; the n_best (logdet, subset) candidates."""
        candidates = []
        failed = 0
        for first in range(0, n_starts, _BATCH):
            starts = [self._start(Xs, rng, ridge, hs) for _ in range(min(_BATCH, n_starts - first))]
            failed += sum(st is None for st in starts)
            if not ridge and failed > n_starts // 2:
                raise _Singular  # most random subsets of h records are singular: a degenerate core
            starts = [st for st in starts if st is not None]
            for size in sorted({len(st) for st in starts}):  # starts grown past p + 1 are batched by size
                group = np.array([st for st in starts if len(st) == size])
                subsets = _batch_closest(Xs, group, hs, ridge)
                for _ in range(2):
                    subsets = _batch_closest(Xs, subsets, hs, ridge)
                logdets = _batch_logdet(Xs, subsets, ridge)
                candidates += [(float(ld), tuple(np.sort(sb)))
                               for ld, sb in zip(logdets, subsets, strict=True) if np.isfinite(ld)]
        return sorted(set(candidates))[: self.n_best]

    @staticmethod
    def _start(X, rng, ridge, h):
        """The paper's start: a random (p+1)-subset, grown until its covariance is non-singular (by half
        again at each step, so ties cannot make it grow record by record); None when even h records of it
        are singular."""
        n, p = X.shape
        order = rng.permutation(n)
        size = p + 1
        while size <= n:
            if not _is_singular(_regularised(_mean_cov(X[order[:size]])[1], ridge)):
                return order[:size]
            if size >= h:
                return None
            size = min(max(size + 1, size * 3 // 2), h)
        return None

    @staticmethod
    def _c_step(X, subset, h, ridge):
        mu, S = _mean_cov(X[subset])
        S = _regularised(S, ridge)
        if _is_singular(S):
            if not ridge:
                raise _Singular
            # Singular despite the ridge: the subset spans more than 12 orders of magnitude of variance
            # (values compressed beyond the preparation's bound next to tied ones). The ridge is raised to
            # the singularity threshold of this subset, so the step can go on (the search only compares
            # determinants under one ridge, and this one is used for this step's distances only).
            S = S + 2 * _RCOND * float(np.linalg.eigvalsh(S)[-1]) * np.eye(len(S))
        new = np.argpartition(sq_distances(X, mu, S), h - 1)[:h]
        return new, _logdet(_regularised(_mean_cov(X[new])[1], ridge))

    def _converge(self, X, subset, h, ridge, max_steps: int = 100):
        subset = np.sort(subset)
        logdet = _logdet(_regularised(_mean_cov(X[subset])[1], ridge))
        for _ in range(max_steps):
            new, new_logdet = self._c_step(X, subset, h, ridge)
            new = np.sort(new)
            if new_logdet >= logdet - 1e-12:
                break
            subset, logdet = new, new_logdet
        return logdet, tuple(subset)


def _deterministic_starts(X: np.ndarray, h: int) -> list[np.ndarray]:
    """Starts that need no random draw, from DetMCD (Hubert, Rousseeuw & Verdonck 2012, "A deterministic
    algorithm for robust location and scatter", J. Computational and Graphical Statistics 21): on the
    columns robustly standardised, initial scatters from the hyperbolic tangent of the values, their
    Spearman ranks, their normal scores and their spatial signs, each turned into h closest records
    through its eigenvectors and robust scales there; and the h records nearest the coordinatewise median.
    Random starts can all end in the same local optimum (on Hawkins-Bradu-Kass, 500 of them did for one
    seed); these do not depend on the seed or on the order of the rows."""
    n, p = X.shape
    center = np.median(X, axis=0)
    scale = np.array([robust_scale(X[:, j])[1] for j in range(p)])
    Z = (X - center) / scale
    ranks = np.column_stack([stats.rankdata(Z[:, j]) for j in range(p)])
    norms = np.linalg.norm(Z, axis=1, keepdims=True)
    signs = Z / np.where(norms > 0, norms, 1.0)
    with np.errstate(invalid="ignore", divide="ignore"):  # a column constant in X has no correlation
        scatters = [np.corrcoef(np.tanh(Z), rowvar=False), np.corrcoef(ranks, rowvar=False),
                    np.corrcoef(stats.norm.ppf((ranks - 1 / 3) / (n + 1 / 3)), rowvar=False), signs.T @ signs / n]
    starts = [np.argsort(norms[:, 0], kind="stable")[:h]]
    for S in scatters:
        S = np.atleast_2d(np.nan_to_num(S))
        _, V = np.linalg.eigh(S)
        proj = Z @ V
        spread = np.array([robust_scale(proj[:, j])[1] for j in range(p)])
        loc = np.median(proj, axis=0)
        d2 = (((proj - loc) / spread) ** 2).sum(axis=1)
        starts.append(np.argsort(d2, kind="stable")[:h])
    return starts


def _batch_closest(X: np.ndarray, subsets: np.ndarray, h: int, ridge: float) -> np.ndarray:
    """One C-step for many subsets at once: the h records closest to each subset's mean and covariance.

    Subsets whose covariance is singular (even with the ridge) are returned unchanged; their determinant
    is -inf for _batch_logdet only when ridge is 0, which the caller turns into a restart with a ridge.
    """
    sub = X[subsets]  # (S, m, p)
    mu = sub.mean(axis=1)
    D = sub - mu[:, None, :]
    cov = np.swapaxes(D, 1, 2) @ D / subsets.shape[1]  # batched matmul (BLAS): einsum does not use it here
    if ridge:
        cov = cov + ridge * np.eye(X.shape[1])
    w = np.linalg.eigvalsh(cov)
    ok = w[:, 0] > _RCOND * np.maximum(w[:, -1], np.finfo(float).tiny)
    if not ok.all() and not ridge:
        raise _Singular
    out = np.empty((len(subsets), h), dtype=np.intp)
    L = np.linalg.cholesky(cov[ok])
    Linv = np.linalg.inv(L)
    Z = (X[None, :, :] - mu[ok][:, None, :]) @ np.swapaxes(Linv, 1, 2)
    d2 = np.einsum("smi,smi->sm", Z, Z)
    out[ok] = np.argpartition(d2, h - 1, axis=1)[:, :h]
    out[~ok] = subsets[~ok][:, :h] if subsets.shape[1] >= h else np.argsort(X[:, 0])[:h]
    return out


def _batch_logdet(X: np.ndarray, subsets: np.ndarray, ridge: float) -> np.ndarray:
    sub = X[subsets]
    D = sub - sub.mean(axis=1)[:, None, :]
    cov = np.swapaxes(D, 1, 2) @ D / subsets.shape[1]
    if ridge:
        cov = cov + ridge * np.eye(X.shape[1])
    sign, logdet = np.linalg.slogdet(cov)
    return np.where(sign > 0, logdet, -np.inf)


class _Singular(Exception):
    """An h-subset covariance is singular: the search restarts with a ridge."""
