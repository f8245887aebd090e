"""robust_distance: squared robust Mahalanobis distance from a reweighted MCD fit."""

from __future__ import annotations

import numpy as np
from scipy import special, stats

from .base import Method
from .mcd import SAMPLE_ABOVE, FastMCD, MCDFit, _sq_distances


class RobustDistance(Method):
    """Squared Mahalanobis distance to the reweighted Minimum Covariance Determinant centre.

    Rousseeuw, P. J. & Van Driessen, K. (1999), "A fast algorithm for the minimum covariance determinant
    estimator", Technometrics 41(3). See :mod:`investigator.methods.mcd` for the fit.

    Parameters
    ----------
    cutoff : chi-square quantile above which a record is flagged (df = number of features used).
    seed : seed of the FastMCD starts.
    n_starts : number of random starts.
    columns : indices of the feature columns to use (default: all).
    exact : never search the raw MCD on a sample (by default it does above ``mcd.SAMPLE_ABOVE`` records).

    Fitted attributes: ``mcd_`` (:class:`MCDFit`), ``columns_``, ``precision_`` (inverse covariance),
    ``cutoff_``, ``reference_scores_``; ``fits_``/``precisions_`` hold one fit per kind of normal after
    :meth:`fit_kinds` (otherwise just ``mcd_``).
    """

    key = "robust_distance"
    score_units = "squared robust Mahalanobis distance"

    def __init__(self, *, cutoff: float = 0.975, contamination: float | None = None, seed: int = 0,
                 n_starts: int = 500, columns: np.ndarray | None = None, exact: bool = False) -> None:
        super().__init__(cutoff=cutoff, contamination=contamination)
        self.seed = seed
        self.n_starts = n_starts
        self.columns = columns
        self.exact = exact

    def _mcd(self) -> FastMCD:
        return FastMCD(n_starts=self.n_starts, seed=self.seed, sample_above=None if self.exact else SAMPLE_ABOVE)

    def parameters(self) -> dict:
        out = {
            "support": int(self.mcd_.h),
            "starts": "exact enumeration" if self.mcd_.exact else self.n_starts,
            "reweighting": "records within the 0.975 chi-square quantile of the raw fit",
            "features_used": int(len(self.columns_)),
            "ridge": self.mcd_.ridge,
        }
        if self.mcd_.sample:
            out["raw_fit_sample"] = int(self.mcd_.sample)
        if len(self.fits_) > 1:
            out["kinds"] = [int(f.h) for f in self.fits_]  # one MCD per large cluster: their supports
        return out

    def _fit(self, X, neighbors=None):
        self.columns_ = np.arange(X.shape[1]) if self.columns is None else np.asarray(self.columns)
        Xc = X[:, self.columns_]
        self.mcd_: MCDFit = self._mcd().fit(Xc)
        self.precision_ = np.linalg.inv(self.mcd_.covariance)
        self.fits_ = [self.mcd_]
        self.precisions_ = [self.precision_]
        return self.score(X)

    def fit_kinds(self, X: np.ndarray, members: list[np.ndarray]) -> RobustDistance:
        """Refit one MCD per large cluster ("kind of normal") of reference records; a record is then measured
        against the nearest kind, so members of one kind are not flagged for being far from another."""
        self.fits_ = [self._mcd().fit(X[m][:, self.columns_]) for m in members]
        self.precisions_ = [np.linalg.inv(f.covariance) for f in self.fits_]
        self.reference_scores_ = self.score(X)
        return self

    def _all_kinds(self, X) -> np.ndarray:
        Xc = X[:, self.columns_]
        return np.column_stack([_sq_distances(Xc, f.location, f.covariance) for f in self.fits_])

    def kind_of(self, X) -> np.ndarray:
        """Index into ``fits_`` of the kind each record is measured against (its nearest)."""
        return np.argmin(self._all_kinds(X), axis=1)

    def fit_for(self, x) -> tuple[np.ndarray, np.ndarray]:
        """Location and precision of the fit one record is measured against."""
        k = int(self.kind_of(np.atleast_2d(x))[0]) if len(self.fits_) > 1 else 0
        return self.fits_[k].location, self.precisions_[k]

    def score(self, X, neighbors=None):
        if len(getattr(self, "fits_", ())) > 1:
            return self._all_kinds(X).min(axis=1)
        return _sq_distances(X[:, self.columns_], self.mcd_.location, self.mcd_.covariance)

    @property
    def df(self) -> int:
        return len(self.columns_)

    def _fit_scale(self, reference_scores):
        pass  # the chi-square model gives the scale

    def _default_cutoff(self):
        return float(stats.chi2.ppf(self.cutoff, self.df)), (
            f"the {self.cutoff:g} quantile of the chi-square distribution with {self.df} degrees of freedom"
        )

    def standardise(self, scores):
        # The normal quantile of the chi-square probability, from the log tail so that huge distances
        # keep their order instead of all becoming infinite.
        return -special.ndtri_exp(stats.chi2.logsf(scores, self.df))
