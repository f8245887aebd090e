"""What every scoring method shares: the cutoff rule and the unified score used by the combination.

Unified scores follow Kriegel, Kroger, Schubert & Zimek (2011), "Interpreting and Unifying Outlier Scores"
(SDM): regularise the raw score (log for ratio- and distance-like scores), then Gaussian scaling
u = max(0, erf((t - centre) / (spread * sqrt 2))). We take centre and spread robustly so the outliers
being sought do not set their own scale: the median of the reference records' scores, and the spread of
their upper half, (Q3 - median) / 0.6745, since outlier scores are right-skewed.
The standardised value z = (t - centre) / spread is what the combination averages; u is 0 for a typical
record and reaches 2q - 1 (0.95 for q = 0.975) exactly at the method's cutoff.
"""

from __future__ import annotations

from math import sqrt

import numpy as np
from scipy import special, stats

from ..features import robust_center_scale


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
        # Outlier scores are right-skewed even after the log: the spread that matters is that of the
        # upper half, (Q3 - median) / 0.6745, the upper semi-interquartile range of a normal.
        upper = (float(np.quantile(t, 0.75)) - self.center_) / 0.6744897501960817
        self.spread_ = upper if upper > 0 else spread

    def _default_cutoff(self) -> tuple[float, str]:
        z = stats.norm.ppf(self.cutoff)
        t = self.center_ + z * self.spread_
        return float(self._unregularise(t)), (
            f"median + {z:.2f} x upper spread of the log score ({z:.2f} is the {self.cutoff:g} normal "
            "quantile; median and (Q3 - median) / 0.6745 of the reference records' scores)"
        )

    def _unregularise(self, t: float) -> float:
        return float(np.exp(t))

    def standardise(self, scores: np.ndarray) -> np.ndarray:
        """Scores as robust z-values: 0 for a typical record, the cutoff's normal quantile at the cutoff."""
        return (self._regularise(scores) - self.center_) / self.spread_

    def unify(self, scores: np.ndarray) -> np.ndarray:
        """Scores on the common [0, 1] scale (Kriegel et al. 2011 Gaussian scaling, robust centre)."""
        return gaussian_scaling(self.standardise(scores))

    def flags(self, scores: np.ndarray) -> np.ndarray:
        return scores > self.cutoff_

    def describe(self) -> dict:
        return {
            "parameters": self.parameters(),
            "cutoff": float(self.cutoff_),
            "cutoff_rule": self.cutoff_rule_,
            "score": self.score_units,
        }
