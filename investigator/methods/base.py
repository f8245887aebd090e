"""What every scoring method shares: the cutoff rule, the z-values the combination averages, and the
far-out level at which one method may flag a record on its own.

Unified scores follow Kriegel, Kroger, Schubert & Zimek (2011), "Interpreting and Unifying Outlier Scores"
(SDM): regularise the raw score (log for ratio- and distance-like scores), then Gaussian scaling
u = max(0, erf((t - centre) / (spread * sqrt 2))), with centre and spread taken so the outliers being
sought do not set their own scale:

* the cutoff is the ``cutoff`` quantile (0.975) of the reference scores, so each method flags the top 2.5%
  of the reference records whatever the shape of its score distribution (outlier scores are right-skewed
  and their tails differ from method to method), but never above the far-out fence of t, Q3 + 3 IQR
  (Tukey 1977), widened for a right-skewed bulk to Q3 + 6 (Q3 - median) (Kimber 1990; see
  :func:`upper_fence`): every record beyond the fence is flagged, however many there are;
* centre = the median of t, and spread = (t_cutoff - centre) / z_q with z_q the normal quantile of
  ``cutoff``, so that z = (t - centre) / spread equals z_q exactly at the cutoff. When tied scores put the
  cutoff on the median, the spread falls back to the robust scale chain of :func:`robust_scale`, which is
  never zero for scores that vary.

A score of zero (a distance to the k-th neighbour among exact copies) has no logarithm: t = log(s + c),
with c the smallest positive reference score, whenever a reference score is zero (c = 0 otherwise).

**Far beyond.** A record whose regularised score lies beyond the far-out fence of the reference records'
regularised scores (:func:`upper_fence`, its width taken as at least 1.349 spreads, that of a normal, so
tied scores cannot shrink the fence), is far beyond anything the method sees among ordinary records, and
the combination lets that method flag it alone (:mod:`investigator.pipeline.combine`). Since z is linear in the
regularised score, this is the same fence on the z-values; ``Scale.far`` holds it as a z-value.

Fitting returns everything scoring needs in a frozen :class:`Scale`; scoring never changes a fitted
method, and a per-kind calibration is a new :class:`Scale` fitted on that kind's scores
(:meth:`Method.calibrate`), never an overwrite of the method's own.
"""

from __future__ import annotations

from dataclasses import dataclass
from math import sqrt
from typing import TYPE_CHECKING

import numpy as np
from scipy import special, stats

from investigator.methods.fitted import read_only
from investigator.prepare.features import robust_scale

if TYPE_CHECKING:
    from investigator.methods.neighbors import NeighborGraph, NeighborSearch

FAR_OUT = 3.0  # the far-out fence: Q3 + 3 IQR (Tukey), or 3 x twice the upper semi-IQR when wider
NORMAL_IQR = 1.3489795003921634  # interquartile range of the standard normal


def gaussian_scaling(z: np.ndarray) -> np.ndarray:
    """max(0, erf(z / sqrt 2)): 0 at or below a typical record, 0.95 at z = 1.96, towards 1 beyond."""
    return np.maximum(0.0, special.erf(np.asarray(z, dtype=float) / sqrt(2.0)))


def upper_fence(t: np.ndarray, floor: float = 0.0) -> float:
    """The far-out fence Q3 + 3 w of scores ``t``, with w the larger of the IQR (Tukey 1977) and twice the
    upper semi-interquartile range, 2 (Q3 - median) (Kimber 1990, "Exploratory data analysis for possibly
    censored data from skewed distributions", Applied Statistics 39): the same as Tukey's for a symmetric
    bulk, wider for a right-skewed one, whose long upper tail is the method's own and not outliers
    (measured: Tukey's fence leaves out 1.2% of the log local outlier factors of 5,000 normal records,
    this one 0.5%). ``floor``: the least w may be."""
    t = np.asarray(t, dtype=float)
    t = t[np.isfinite(t)]
    if len(t) == 0:
        return float("inf")
    q1, q2, q3 = np.quantile(t, [0.25, 0.5, 0.75])
    return float(q3 + FAR_OUT * max(q3 - q1, 2.0 * (q3 - q2), floor))


def far_fence(t: np.ndarray, spread: float) -> float:
    """:func:`upper_fence` of regularised reference scores ``t``, its width taken as at least 1.349
    ``spread`` (what a normal with that spread has), so that tied scores cannot shrink it to nothing."""
    return upper_fence(t, NORMAL_IQR * spread)


@dataclass(frozen=True)
class Scale:
    """How one method turns raw scores into z-values and flags, for one set of reference records (all of
    them, or one kind of normal). ``center``/``spread`` are in regularised units (unused by methods with
    a distribution of their own); ``cutoff`` is in the method's score units; ``far`` is a z-value."""

    center: float
    spread: float
    spread_rule: str
    cutoff: float
    cutoff_rule: str
    far: float

    def as_dict(self) -> dict:
        return {"cutoff": float(self.cutoff), "far_beyond_z": float(self.far)}


class Method:
    """Base of the scoring methods: ``fit`` on reference records, ``score`` any records.

    Subclasses set ``key``, ``needs_neighbors`` (0 or the k they use) and implement ``_fit``/``score``.
    After ``fit``: ``reference_scores_`` (the scores of the reference records themselves), ``offset_``
    (the log offset, 0 unless a reference score is 0) and ``scale_`` (a :class:`Scale`: centre, spread,
    cutoff, far-out level); ``cutoff_`` is ``scale_.cutoff``.
    """

    key: str = ""
    needs_neighbors: int = 0
    score_units: str = ""
    votes: bool = True  # hotelling is reported beside the others and does not vote

    def __init__(self, *, cutoff: float = 0.975, contamination: float | None = None) -> None:
        self.cutoff = cutoff
        self.contamination = contamination

    # -- fitted by subclasses ------------------------------------------------------------------
    def _fit(self, X: np.ndarray, neighbors: NeighborSearch | None) -> np.ndarray:
        """Fit on the reference and return the reference records' own scores."""
        raise NotImplementedError

    def score(self, X: np.ndarray, neighbors: NeighborGraph | None = None) -> np.ndarray:
        """Scores of the records ``X``; methods that need neighbours take the records' neighbour graph
        (:meth:`NeighborSearch.query`). Never changes the fitted method."""
        raise NotImplementedError

    def parameters(self) -> dict:
        return {}

    # -- shared --------------------------------------------------------------------------------
    def fit(self, X: np.ndarray, neighbors: NeighborSearch | None = None) -> Method:
        # A copy the method owns, read-only like every fitted array: callers take their own copies.
        scores = read_only(np.array(self._fit(X, neighbors), dtype=float))
        self.reference_scores_ = scores
        positive = scores[scores > 0]
        self.offset_ = 0.0 if len(positive) == len(scores) else (float(positive.min()) if len(positive) else 1.0)
        self.scale_ = self.calibrate(scores)
        return self

    @property
    def cutoff_(self) -> float:
        return self.scale_.cutoff

    @property
    def cutoff_rule_(self) -> str:
        return self.scale_.cutoff_rule

    def _regularise(self, scores: np.ndarray) -> np.ndarray:
        s = np.asarray(scores, dtype=float)
        return np.log(np.maximum(s + self.offset_, 1e-300))

    def _unregularise(self, t: float) -> float:
        return float(np.exp(t) - self.offset_)

    def _rule_units(self) -> str:
        return "log score" if not self.offset_ else "log(score + smallest positive score)"

    def calibrate(self, scores: np.ndarray) -> Scale:
        """The :class:`Scale` fitted on ``scores`` (the reference records, or the members of one kind)."""
        t = self._regularise(scores)
        t = t[np.isfinite(t)]
        center = float(np.median(t))
        z_q = stats.norm.ppf(self.cutoff)
        # The top (1 - cutoff) share of the reference records, and in any case every record beyond the
        # far-out fence, however many there are.
        span = min(float(np.quantile(t, self.cutoff)), upper_fence(t)) - center
        if span > 0:
            spread, rule = span / z_q, "cutoff quantile"
        else:  # the cutoff quantile sits on the median (over 97.5% of the scores tied)
            _, spread, rule = robust_scale(t)
        if self.contamination is not None:
            cutoff = float(np.quantile(np.asarray(scores, dtype=float), 1.0 - self.contamination))
            cutoff_rule = f"the top {self.contamination:g} share of reference scores"
        else:
            cutoff = self._unregularise(center + z_q * spread)
            cutoff_rule = (f"the {self.cutoff:g} quantile of the reference records' scores, at most the far-out "
                           f"fence of the {self._rule_units()} (Q3 + 3 IQR, or 6 upper semi-IQR when wider)")
        far = (far_fence(t, spread) - center) / spread
        return Scale(center, float(spread), rule, float(cutoff), cutoff_rule, max(far, float(z_q)))

    def standardise(self, scores: np.ndarray, scale: Scale | None = None) -> np.ndarray:
        """Scores as robust z-values: 0 for a typical record, the cutoff's normal quantile at the cutoff."""
        scale = scale or self.scale_
        return (self._regularise(scores) - scale.center) / scale.spread

    def unify(self, scores: np.ndarray, scale: Scale | None = None) -> np.ndarray:
        """Scores on the common [0, 1] scale (Kriegel et al. 2011 Gaussian scaling, robust centre)."""
        return gaussian_scaling(self.standardise(scores, scale))

    def flags(self, scores: np.ndarray, scale: Scale | None = None) -> np.ndarray:
        return np.asarray(scores) > (scale or self.scale_).cutoff

    def describe(self) -> dict:
        return {
            "parameters": self.parameters(),
            "cutoff": float(self.cutoff_),
            "cutoff_rule": self.cutoff_rule_,
            "far_beyond_z": float(self.scale_.far),
            "score": self.score_units,
        }
