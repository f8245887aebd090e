"""What every scoring method shares: the cutoff rule and the unified score used by the combination.

Unified scores follow Kriegel, Kroger, Schubert & Zimek (2011), "Interpreting and Unifying Outlier Scores"
(SDM): regularise the raw score (log for ratio- and distance-like scores), then Gaussian scaling
u = max(0, erf((t - centre) / (spread * sqrt 2))), with centre and spread taken so the outliers being
sought do not set their own scale:

* ordinary reference scores are those inside Tukey's far-out fence, Q3 + 3 IQR of t (Tukey 1977);
* the cutoff is the ``cutoff`` quantile (0.975) of the ordinary scores: what the method's score is for the
  top 2.5% of ordinary records, whatever the shape of its distribution (outlier scores are right-skewed and
  their tails differ from method to method);
* centre = the median of t, and spread = (t_cutoff - centre) / z_q with z_q the normal quantile of
  ``cutoff``, so that z = (t - centre) / spread equals z_q exactly at the cutoff.

The standardised value z is what the combination averages; u is 0 for a typical record and reaches 2q - 1
(0.95 for q = 0.975) exactly at the method's cutoff.
"""

from __future__ import annotations

from math import sqrt

import numpy as np
from scipy import special, stats

from ..features import robust_center_scale

FAR_OUT = 3.0  # Tukey's far-out fence: Q3 + 3 IQR


def gaussian_scaling(z: np.ndarray) -> np.ndarray:
    """max(0, erf(z / sqrt 2)): 0 at or below a typical record, 0.95 at z = 1.96, towards 1 beyond."""
    return np.maximum(0.0, special.erf(np.asarray(z, dtype=float) / sqrt(2.0)))


class Method:
    """Base of the scoring methods: ``fit`` on reference records, ``score`` any records.

    Subclasses set ``key``, ``needs_neighbors`` (0 or the k they use) and implement ``_fit``/``score``.
    After ``fit``: ``reference_scores_`` (the scores of the reference records themselves) and ``cutoff_``
    (the score above which a record is flagged, in the method's own units).
    """

    key: str = ""
    needs_neighbors: int = 0
    score_units: str = ""

    def __init__(self, *, cutoff: float = 0.975, contamination: float | None = None) -> None:
        self.cutoff = cutoff
        self.contamination = contamination

    # -- fitted by subclasses ------------------------------------------------------------------
    def _fit(self, X: np.ndarray, neighbors) -> np.ndarray:
        """Fit on the reference and return the reference records' own scores."""
        raise NotImplementedError

    def score(self, X: np.ndarray, neighbors=None) -> np.ndarray:
        raise NotImplementedError

    def parameters(self) -> dict:
        return {}

    # -- shared --------------------------------------------------------------------------------
    def fit(self, X: np.ndarray, neighbors=None) -> Method:
        self.reference_scores_ = self._fit(X, neighbors)
        self._fit_scale(self.reference_scores_)
        if self.contamination is not None:
            self.cutoff_ = float(np.quantile(self.reference_scores_, 1.0 - self.contamination))
            self.cutoff_rule_ = f"the top {self.contamination:g} share of reference scores"
        else:
            self.cutoff_, self.cutoff_rule_ = self._default_cutoff()
        return self

    def _regularise(self, scores: np.ndarray) -> np.ndarray:
        return np.log(np.maximum(scores, 1e-300))

    def _fit_scale(self, reference_scores: np.ndarray) -> None:
        t = self._regularise(reference_scores)
        t = t[np.isfinite(t)]
        self.center_, spread, _ = robust_center_scale(t)
        q1, q3 = np.quantile(t, [0.25, 0.75])
        ordinary = t[t <= q3 + FAR_OUT * (q3 - q1)]
        self.t_cutoff_ = float(np.quantile(ordinary, self.cutoff))
        z = stats.norm.ppf(self.cutoff)
        # Fallback when the quantile sits on the median (many tied scores): the upper semi-IQR of a normal.
        upper = (float(q3) - self.center_) / 0.6744897501960817
        span = self.t_cutoff_ - self.center_
        self.spread_ = span / z if span > 0 else (upper if upper > 0 else spread)

    def _default_cutoff(self) -> tuple[float, str]:
        z = stats.norm.ppf(self.cutoff)
        t = self.center_ + z * self.spread_
        return float(self._unregularise(t)), (
            f"the {self.cutoff:g} quantile of the reference records' scores inside Tukey's far-out fence "
            "(Q3 + 3 IQR of the log score)"
        )

    def _unregularise(self, t: float) -> float:
        return float(np.exp(t))

    def calibrate_kinds(self, scores: np.ndarray, kinds: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """z-values and flags with each kind of normal judged by its own scores (``kinds``: per record the
        index of its large cluster, -1 for none, which keeps the overall calibration). Returns (z, flags) and
        keeps each kind's cutoff in ``kind_cutoffs_``."""
        self.kind_cutoffs_, self.kind_scales_ = {}, {}
        saved = (self.center_, self.spread_, getattr(self, "t_cutoff_", None), self.cutoff_)
        for k in np.unique(kinds[kinds >= 0]):
            rows = kinds == k
            self._fit_scale(scores[rows])
            cutoff = (float(np.quantile(scores[rows], 1.0 - self.contamination)) if self.contamination is not None
                      else self._default_cutoff()[0])
            self.kind_cutoffs_[int(k)] = cutoff
            self.kind_scales_[int(k)] = (self.center_, self.spread_)
        self.center_, self.spread_, self.t_cutoff_, self.cutoff_ = saved
        return self.apply_kinds(scores, kinds)

    def apply_kinds(self, scores: np.ndarray, kinds: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(z, flags) of any records given their kind of normal (-1: the overall calibration), with the
        per-kind calibration fitted by :meth:`calibrate_kinds`."""
        z, flags = self.standardise(scores), self.flags(scores)
        saved = (self.center_, self.spread_)
        for k, (center, spread) in self.kind_scales_.items():
            rows = kinds == k
            self.center_, self.spread_ = center, spread
            z[rows], flags[rows] = self.standardise(scores[rows]), scores[rows] > self.kind_cutoffs_[k]
        self.center_, self.spread_ = saved
        return z, flags

    def standardise(self, scores: np.ndarray) -> np.ndarray:
        """Scores as robust z-values: 0 for a typical record, the cutoff's normal quantile at the cutoff."""
        return (self._regularise(scores) - self.center_) / self.spread_

    def unify(self, scores: np.ndarray) -> np.ndarray:
        """Scores on the common [0, 1] scale (Kriegel et al. 2011 Gaussian scaling, robust centre)."""
        return gaussian_scaling(self.standardise(scores))

    def flags(self, scores: np.ndarray) -> np.ndarray:
        return scores > self.cutoff_

    def describe(self) -> dict:
        out = {
            "parameters": self.parameters(),
            "cutoff": float(self.cutoff_),
            "cutoff_rule": self.cutoff_rule_,
            "score": self.score_units,
        }
        if getattr(self, "kind_cutoffs_", None):
            out["cutoff_by_kind"] = {str(k + 1): v for k, v in self.kind_cutoffs_.items()}
        return out
