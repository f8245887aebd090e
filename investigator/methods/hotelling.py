"""hotelling: Hotelling T-squared for individual observations against a reference.

T2 = (x - xbar)' S^-1 (x - xbar), with xbar and S (ddof = 1) the mean and sample covariance of the m
reference records and p features. Two control limits, for two different questions:

* phase I, a reference record against its own reference (x is part of xbar and S): m T2 / (m - 1)^2 follows
  Beta(p/2, (m - p - 1)/2), so UCL = ((m - 1)^2 / m) * Beta(1 - alpha; p/2, (m - p - 1)/2)
  (Tracy, N. D., Young, J. C. & Mason, R. L. (1992), "Multivariate control charts for individual
  observations", Journal of Quality Technology 24(2));
* phase II, a new record independent of the reference: T2 * m (m - p) / (p (m + 1)(m - 1)) follows
  F(p, m - p), so UCL = p (m + 1)(m - 1) / (m^2 - m p) * F(1 - alpha; p, m - p)
  (Montgomery, D. C., Introduction to Statistical Quality Control, Wiley, chapter on multivariate process
  monitoring).

Both assume multivariate normal, independent records. The chi-square quantile is the limit only as m grows;
for a reference of tens of records it is too low and flags too many new records.
"""

from __future__ import annotations

import numpy as np
from scipy import linalg, stats

from investigator.errors import InputError
from investigator.methods.base import Method, Scale
from investigator.methods.fitted import owned, read_only
from investigator.methods.tails import f_logsf, normal_quantile_of_tail

_RCOND = 1e-12  # smallest eigenvalue / largest below which the covariance counts as singular


def _check(m: int, p: int, alpha: float, need: int) -> None:
    if not 0.0 < alpha < 1.0:
        raise InputError(f"alpha must lie strictly between 0 and 1, not {alpha}")
    if p < 1 or m < p + need:
        raise InputError(f"Hotelling T-squared with {p} features needs at least {p + need} reference "
                         f"records, not {m}; use a longer reference or fewer features")


def phase_i_limit(m: int, p: int, alpha: float) -> float:
    """Phase I upper control limit ((m-1)^2/m) * Beta(1-alpha; p/2, (m-p-1)/2) (Tracy, Young & Mason 1992).

    For a reference record scored against the mean and covariance of the m reference records it belongs to.
    Needs m >= p + 2.
    """
    _check(m, p, alpha, need=2)
    return float((m - 1) ** 2 / m * stats.beta.ppf(1.0 - alpha, p / 2.0, (m - p - 1) / 2.0))


def phase_ii_limit(m: int, p: int, alpha: float) -> float:
    """Phase II upper control limit p(m+1)(m-1)/(m^2 - m p) * F(1-alpha; p, m-p) (Montgomery).

    For a new record, independent of the m reference records that gave the mean and covariance. Needs
    m >= p + 1.
    """
    _check(m, p, alpha, need=1)
    return float(p * (m + 1) * (m - 1) / (m * m - m * p) * stats.f.ppf(1.0 - alpha, p, m - p))


class Hotelling(Method):
    """Hotelling T-squared of individual records against the mean and sample covariance of a reference.

    Tracy, Young & Mason (1992), "Multivariate control charts for individual observations", J. Quality
    Technology 24(2) (phase I limit); Montgomery, Introduction to Statistical Quality Control (phase II
    limit).

    Parameters
    ----------
    cutoff : 1 - alpha, the probability that an in-control new record stays below the limit. ``cutoff_`` is
        the phase II limit (new records against a reference of m records) at alpha = 1 - cutoff.
    contamination : flag this share of the reference scores instead (as the other methods).
    columns : indices of the feature columns to use (default: all).

    Fitted attributes: ``columns_``, ``m_`` (reference records), ``p_`` (features), ``mean_``,
    ``covariance_`` (ddof = 1, as estimated), ``ridge_`` (0.0 unless the covariance was singular),
    ``singular_``, ``notices_`` (sentences for the caller to report), ``factor_`` (the Cholesky factor of the
    covariance, with the ridge), ``phase_i_limit_``, ``phase_ii_limit_``, ``cutoff_``, ``reference_scores_``
    (the reference records' T2, to compare with the phase I limit; see :meth:`reference_flags`).

    A singular covariance (collinear features, a constant feature, m close to p) is not an error: a ridge of
    1e-6 x the mean variance is added, as the robust distance does, ``singular_`` is set and a notice says
    so. A new record that breaks an exact linear relation of the reference then gets a very large T2; the
    limits, which assume a non-singular covariance, are approximate.
    """

    key = "hotelling"
    score_units = "Hotelling T-squared"
    votes = False  # reported beside the methods; it measures robust_distance's view with a classical fit

    def __init__(self, *, cutoff: float = 0.975, contamination: float | None = None,
                 columns: np.ndarray | None = None) -> None:
        super().__init__(cutoff=cutoff, contamination=contamination)
        self.columns = columns

    @property
    def alpha(self) -> float:
        return 1.0 - self.cutoff

    def parameters(self) -> dict:
        return {
            "reference_records": int(self.m_),
            "features_used": int(self.p_),
            "alpha": float(f"{self.alpha:.12g}"),  # 1 - 0.99 is 0.010000000000000009
            "phase_i_limit": self.phase_i_limit_,
            "phase_ii_limit": self.phase_ii_limit_,
            "ridge": self.ridge_,
        }

    def _fit(self, X, neighbors=None):
        X = np.asarray(X, dtype=float)
        self.columns_ = owned(np.arange(X.shape[1]) if self.columns is None else self.columns)
        Xc = X[:, self.columns_]
        self.m_, self.p_ = Xc.shape
        _check(self.m_, self.p_, self.alpha, need=2)
        self.mean_ = read_only(Xc.mean(axis=0))
        self.covariance_ = read_only(np.atleast_2d(np.cov(Xc, rowvar=False, ddof=1)))
        self.ridge_, self.singular_ = 0.0, False
        notices: list[str] = []
        S = self.covariance_
        w = np.linalg.eigvalsh(S)
        if w[0] <= _RCOND * max(w[-1], np.finfo(float).tiny):
            # Small next to the typical variance: T2 stays finite and a record off the reference's hyperplane
            # still stands out.
            self.ridge_ = 1e-6 * max(float(np.trace(S)) / self.p_, 1.0)
            self.singular_ = True
            S = S + self.ridge_ * np.eye(self.p_)
            notices.append(
                f"hotelling: the reference covariance of {self.p_} features is singular (collinear or "
                f"constant features); a ridge of {self.ridge_:.3g} was added and the control limits are "
                "approximate")
        self.notices_ = notices
        factor, lower = linalg.cho_factor(S, lower=True, check_finite=False)
        self.factor_ = (read_only(factor), lower)  # the Cholesky factor of S (with the ridge), for cho_solve
        self.phase_i_limit_ = phase_i_limit(self.m_, self.p_, self.alpha)
        self.phase_ii_limit_ = phase_ii_limit(self.m_, self.p_, self.alpha)
        return self.score(X)

    def _solve(self, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        D = np.asarray(X, dtype=float)[:, self.columns_] - self.mean_
        W = linalg.cho_solve(self.factor_, D.T, check_finite=False).T  # S^-1 (x - xbar), row by row
        return D, W

    def score(self, X, neighbors=None):
        """T2 of each record against the reference."""
        D, W = self._solve(X)
        return np.einsum("ij,ij->i", D, W)

    def contributions(self, X) -> np.ndarray:
        """Per-feature split of T2: phi_j = (x - xbar)_j * (S^-1 (x - xbar))_j; each row sums to T2.

        These are the Shapley values of the game v(C) = T2 of x with the features outside C set to the
        reference mean (the same split as the robust distance): the diagonal term is feature j's own, each
        cross term 2 d_i P_ij d_j is shared equally by features i and j. A negative share means the
        feature's deviation is expected given the others (it lowers T2). Columns follow ``columns_``.
        """
        D, W = self._solve(np.atleast_2d(X))
        return D * W

    def reference_flags(self) -> np.ndarray:
        """Reference records above the phase I limit (candidates to clean out of a reference)."""
        return self.reference_scores_ > self.phase_i_limit_

    # The F distribution gives the scale and the cutoff: no fitted spread.
    def calibrate(self, scores):
        if self.contamination is not None:
            cutoff = float(np.quantile(np.asarray(scores, dtype=float), 1.0 - self.contamination))
            rule = f"the top {self.contamination:g} share of reference scores"
        else:
            cutoff = self.phase_ii_limit_
            rule = (f"the phase II limit p(m+1)(m-1)/(m^2 - m p) x F({self.cutoff:g}; p, m - p) with m = {self.m_} "
                    f"reference records and p = {self.p_} features (Montgomery)")
        return Scale(0.0, 1.0, "F distribution", cutoff, rule, float("inf"))

    def _f_statistic(self, scores: np.ndarray) -> np.ndarray:
        m, p = self.m_, self.p_
        return np.asarray(scores, dtype=float) * (m * m - m * p) / (p * (m + 1) * (m - 1))

    def standardise(self, scores, scale=None):
        # The normal quantile of the phase II probability, from the log tail so huge T2 keep their order.
        return normal_quantile_of_tail(f_logsf(self._f_statistic(scores), self.p_, self.m_ - self.p_))
