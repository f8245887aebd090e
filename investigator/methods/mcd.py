"""Minimum Covariance Determinant: FastMCD with many starts, exact enumeration on tiny data.

Rousseeuw, P. J. & Van Driessen, K. (1999). A fast algorithm for the minimum covariance determinant
estimator. Technometrics 41(3), 212-223.

The raw MCD is the mean and covariance of the h records whose covariance has the smallest determinant.
FastMCD reaches it by concentration steps (C-steps): from a candidate subset, compute its mean and
covariance, keep the h records closest to it in Mahalanobis distance, repeat; the determinant never grows.
The result depends on where the C-steps start, so we start from many random (p+1)-subsets, keep the best
candidates and iterate them to convergence, and keep the smallest determinant. When all h-subsets can be
enumerated cheaply, we enumerate them and return the exact MCD.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import combinations
from math import comb

import numpy as np
from scipy import stats

SAMPLE_ABOVE = 100_000  # records; above this the raw MCD is searched on a random sample (not with exact)
SAMPLE_SIZE = 50_000
ENUMERATE_AT_MOST = 5000  # h-subsets; below this the exact MCD is cheaper than the search
SUBSAMPLE = 1500  # FastMCD draws its starts on a subsample of this size for large n (paper: 5 x 300)
PART = 300  # ... split into parts of this size
FINAL_BEST = 3  # candidates iterated to convergence on all records of a large table
_RCOND = 1e-12
_BATCH = 50  # starts whose C-steps run together as one batch of array operations


@dataclass
class MCDFit:
    location: np.ndarray  # reweighted
    covariance: np.ndarray  # reweighted, consistency corrected
    raw_location: np.ndarray
    raw_covariance: np.ndarray  # of the best h-subset, maximum likelihood (divided by h)
    raw_support: np.ndarray  # bool mask of the best h-subset
    support: np.ndarray  # bool mask of the records kept by reweighting
    raw_logdet: float
    h: int
    exact: bool
    ridge: float  # 0 unless the covariance was singular
    sample: int | None = None  # records the raw fit was searched on, when a sample (None: all records)


def _mean_cov(X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    mu = X.mean(axis=0)
    D = X - mu
    return mu, D.T @ D / len(X)


def _logdet(S: np.ndarray) -> float:
    sign, logdet = np.linalg.slogdet(S)
    return logdet if sign > 0 else -np.inf


def _sq_distances(X: np.ndarray, mu: np.ndarray, S: np.ndarray) -> np.ndarray:
    """Squared Mahalanobis distances through a Cholesky solve (S must be positive definite)."""
    L = np.linalg.cholesky(S)
    from scipy.linalg import solve_triangular

    Z = solve_triangular(L, (X - mu).T, lower=True, check_finite=False)
    return np.einsum("ij,ij->j", Z, Z)


def _regularised(S: np.ndarray, ridge: float) -> np.ndarray:
    return S + ridge * np.eye(len(S)) if ridge else S


def _is_singular(S: np.ndarray) -> bool:
    w = np.linalg.eigvalsh(S)
    return w[0] <= _RCOND * max(w[-1], np.finfo(float).tiny)


class FastMCD:
    """Raw and reweighted MCD of a data matrix.

    Parameters
    ----------
    support_fraction : h / n; default (n + p + 1) / (2n), the highest breakdown point.
    n_starts : random (p+1)-subsets to start C-steps from (the paper uses 500).
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

    def fit(self, X: np.ndarray, *, enumerate_at_most: int = ENUMERATE_AT_MOST) -> MCDFit:
        n, p = X.shape
        if self.sample_above is not None and n > self.sample_above:
            rng = np.random.default_rng([self.seed, 17])
            rows = np.sort(rng.choice(n, size=self.sample_size, replace=False))
            raw = FastMCD(self.support_fraction, self.n_starts, self.n_best, self.seed, None).fit(X[rows])
            mask = np.zeros(n, dtype=bool)
            mask[rows[raw.raw_support]] = True
            return self._reweight(X, raw.raw_location, raw.raw_covariance, mask, raw.raw_logdet, raw.h,
                                  raw.ridge, sample=len(rows))
        h = self.h_for(n, p)
        _, S_all = _mean_cov(X)
        exact = n <= 40 and comb(n, h) <= enumerate_at_most  # comb() itself is slow for large n
        ridge = self._ridge_for(S_all) if _is_singular(S_all) else 0.0
        try:
            subset = self._enumerate(X, h) if exact else self._search(X, h, ridge)
            mu, S = _mean_cov(X[subset])
            if _is_singular(_regularised(S, ridge)):
                raise _Singular
        except _Singular:
            # More than h records on one hyperplane (an exact fit): regularise and search again.
            ridge = self._ridge_for(S_all)
            subset = self._enumerate(X, h) if exact else self._search(X, h, ridge)
            mu, S = _mean_cov(X[subset])
        raw_S = _regularised(S, ridge)
        mask = np.zeros(n, dtype=bool)
        mask[subset] = True
        fit = self._reweight(X, mu, raw_S, mask, _logdet(raw_S), h, ridge)
        fit.exact = exact
        return fit

    def _reweight(self, X, mu, raw_S, mask, raw_logdet, h, ridge, sample=None) -> MCDFit:
        """Consistency correction and reweighting of a raw fit, over every record of X."""
        p = X.shape[1]
        d2 = _sq_distances(X, mu, raw_S)
        # Consistency: scale so the median distance matches the chi-square median (as scikit-learn does).
        raw_corrected = raw_S * (np.median(d2) / stats.chi2.ppf(0.5, p))
        d2 = d2 * (stats.chi2.ppf(0.5, p) / np.median(d2))
        q = stats.chi2.ppf(0.975, p)
        keep = d2 <= q
        loc, cov = _mean_cov(X[keep])
        # Records kept inside the 0.975 ellipsoid have a smaller covariance than the whole normal
        # population; this factor undoes that truncation (Croux & Haesbroeck 1999, consistency factor).
        cov = _regularised(cov * (0.975 / stats.chi2.cdf(q, p + 2)), ridge)
        if _is_singular(cov):
            ridge = ridge or self._ridge_for(_mean_cov(X)[1])
            cov = _regularised(cov, ridge)
        return MCDFit(loc, cov, mu, raw_corrected, mask, keep, raw_logdet, h, False, ridge, sample)

    @staticmethod
    def _ridge_for(S: np.ndarray) -> float:
        # Small next to the typical variance (features are robust-scaled to unit spread): distances stay
        # finite, and a record that breaks an exact linear relation still gets a large distance.
        return 1e-6 * max(float(np.trace(S)) / len(S), 1.0)

    @staticmethod
    def _enumerate(X: np.ndarray, h: int) -> np.ndarray:
        best, best_det = None, np.inf
        for subset in combinations(range(len(X)), h):
            idx = np.fromiter(subset, dtype=np.intp, count=h)
            det = np.linalg.det(_mean_cov(X[idx])[1])
            if det < best_det:
                best, best_det = idx, det
        return best

    def _search(self, X: np.ndarray, h: int, ridge: float) -> np.ndarray:
        rng = np.random.default_rng([self.seed, 11])
        n, p = X.shape
        if n <= 2 * PART:
            candidates = self._starts(X, h, self.n_starts, rng, ridge)
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
            for subset in merged:
                for _ in range(2):
                    subset, logdet = self._c_step(Xs, subset, h_sub, ridge)
                candidates.append((logdet, tuple(np.sort(subset))))
        if not candidates:
            raise _Singular
        candidates = sorted(set(candidates))[: self.n_best]
        if sub is None:
            best = [self._converge(X, np.array(s, dtype=np.intp), h, ridge) for _, s in candidates]
            return np.array(min(best)[1], dtype=np.intp)
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
        for first in range(0, n_starts, _BATCH):
            starts = [self._start(Xs, rng, ridge) for _ in range(min(_BATCH, n_starts - first))]
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
    def _start(X, rng, ridge):
        """The paper's start: a random (p+1)-subset, grown until its covariance is non-singular."""
        n, p = X.shape
        order = rng.permutation(n)
        for size in range(p + 1, n + 1):
            if not _is_singular(_regularised(_mean_cov(X[order[:size]])[1], ridge)):
                return order[:size]
        return None

    @staticmethod
    def _c_step(X, subset, h, ridge):
        mu, S = _mean_cov(X[subset])
        S = _regularised(S, ridge)
        if _is_singular(S):
            raise _Singular
        new = np.argpartition(_sq_distances(X, mu, S), h - 1)[:h]
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


def _batch_closest(X: np.ndarray, subsets: np.ndarray, h: int, ridge: float) -> np.ndarray:
    """One C-step for many subsets at once: the h records closest to each subset's mean and covariance.

    Subsets whose covariance is singular (even with the ridge) are returned unchanged; their determinant
    is -inf for _batch_logdet only when ridge is 0, which the caller turns into a restart with a ridge.
    """
    sub = X[subsets]  # (S, m, p)
    mu = sub.mean(axis=1)
    D = sub - mu[:, None, :]
    cov = np.einsum("smi,smj->sij", D, D) / subsets.shape[1]
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
    cov = np.einsum("smi,smj->sij", D, D) / subsets.shape[1]
    if ridge:
        cov = cov + ridge * np.eye(X.shape[1])
    sign, logdet = np.linalg.slogdet(cov)
    return np.where(sign > 0, logdet, -np.inf)


class _Singular(Exception):
    """An h-subset covariance is singular: the search restarts with a ridge."""
