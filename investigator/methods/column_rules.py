"""The classic per-column screens, reported per record as column hits.

* ``three_sigma``: |x - mean| > 3 standard deviations (common practice; about 0.27% of a normal sample).
* ``modified_z``: |0.6745 (x - median) / MAD| > 3.5 (Iglewicz & Hoaglin 1993, "How to Detect and Handle
  Outliers"); 0.6745 = 1 / 1.4826 makes the MAD estimate the standard deviation of a normal sample.
* ``boxplot_fence``: x < Q1 - 1.5 IQR or x > Q3 + 1.5 IQR (Tukey 1977, "Exploratory Data Analysis");
  quartiles by linear interpolation between order statistics (numpy's default, Hyndman & Fan type 7).

Rules run on each numeric feature on the scale the scan uses (after a log transform, if one was chosen,
since these rules assume a roughly symmetric bulk); values and limits are reported in the column's units.
Imputed cells are never hits.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from investigator.prepare import magnitudes
from investigator.prepare.features import Features

RULES = ("three_sigma", "modified_z", "boxplot_fence")
MODIFIED_Z = 3.5
SIGMAS = 3.0
FENCE = 1.5


@dataclass(frozen=True)
class ColumnLimits:
    column: int
    lower: dict[str, float]
    upper: dict[str, float]


class ColumnRules:
    """Fit the three rules' limits per numeric feature; ``hits`` lists the cells outside them."""

    def fit(self, features: Features, skip: frozenset[str] = frozenset()) -> ColumnRules:
        """``skip``: numeric features judged by a rule of their own (the hour of a date column: the
        outside-hours rule), left out here."""
        self.limits_: list[ColumnLimits] = []
        self.skipped_: list[str] = []
        for j in np.flatnonzero(features.numeric_mask()):
            if features.names[j] in skip:
                continue
            t = features.transformed[~features.imputed[:, j], j]
            if not len(t):  # every cell of the reference records was filled: nothing to set limits by
                continue
            # Values near the float limits: computed on t / 2^k (exact), so no difference overflows (and the
            # standard deviation by magnitudes.mean_sd, whose squares cannot); a limit that still lies beyond
            # the largest float is no limit and is left out.
            k = magnitudes.shift_of(t)
            u = np.ldexp(t, -k)
            mean, sd = magnitudes.mean_sd(u) if len(u) > 1 else (float(u[0]), 0.0)
            med = float(np.median(u))
            mad = float(np.median(np.abs(u - med)))
            q1, q3 = (float(v) for v in np.quantile(u, [0.25, 0.75]))
            lower = {"three_sigma": mean - SIGMAS * sd, "boxplot_fence": q1 - FENCE * (q3 - q1)}
            upper = {"three_sigma": mean + SIGMAS * sd, "boxplot_fence": q3 + FENCE * (q3 - q1)}
            if mad > 0:
                half = MODIFIED_Z * mad / 0.6745
                lower["modified_z"], upper["modified_z"] = med - half, med + half
            else:
                self.skipped_.append(features.names[j])
            lower, upper = _finite(lower, k), _finite(upper, k)
            upper = {r: v for r, v in upper.items() if r in lower}
            lower = {r: v for r, v in lower.items() if r in upper}
            self.limits_.append(ColumnLimits(int(j), lower, upper))
        return self

    def hits(self, features: Features) -> list[list[dict]]:
        """Per record, a list of {column, rule, value, limit} in the column's own units."""
        out: list[list[dict]] = [[] for _ in range(len(features.values))]
        for lim in self.limits_:
            j, spec = lim.column, features.specs[lim.column]
            t = features.transformed[:, j]
            ok = ~features.imputed[:, j]
            for rule in RULES:
                if rule not in lim.upper:
                    continue
                for side, limit, mask in (
                    ("upper", lim.upper[rule], t > lim.upper[rule]),
                    ("lower", lim.lower[rule], t < lim.lower[rule]),
                ):
                    for i in np.flatnonzero(mask & ok):
                        out[i].append({
                            "column": spec.name,
                            "rule": rule,
                            "value": float(features.raw[i, j]),
                            "limit": float(spec.to_original(limit)),
                            "side": side,
                        })
        return out  # per record: features in order, then rules in RULES order

    def describe(self) -> dict:
        return {
            "three_sigma": f"|x - mean| > {SIGMAS:g} standard deviations",
            "modified_z": f"|0.6745 (x - median) / MAD| > {MODIFIED_Z:g}",
            "boxplot_fence": f"outside Q1 - {FENCE:g} IQR .. Q3 + {FENCE:g} IQR",
        }


def _finite(limits: dict[str, float], k: int) -> dict[str, float]:
    """Limits computed on t / 2^k back in t's units, without those beyond the largest float."""
    with np.errstate(over="ignore"):
        back = {rule: float(np.ldexp(v, k)) for rule, v in limits.items()}
    return {rule: v for rule, v in back.items() if np.isfinite(v)}
