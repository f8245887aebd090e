"""From raw columns to the feature matrix the methods share.

Fitted on reference records, applied to any records (a plain scan fits and applies on the same table):

* numbers: non-finite values and cells that do not parse count as missing; ``--log auto`` takes the log of a
  non-negative column with at least 10 distinct values whose bulk is right-skewed: quartile skewness above
  0.15 that the log at least halves (log(x + smallest positive value) when the column has zeros);
* categories: each level becomes its *rarity*, ln(typical share / share of the level), floored at 0, where
  the typical share is that of the median record's level (missing is a level of its own). The feature is
  not rescaled: a level e^3 = 20 times rarer than a typical record's counts as much as 3 robust standard
  deviations on a numeric feature, and levels at least as common as the typical one all count 0;
* missing values take the column median (in transformed units) and every imputed cell is kept in a mask;
* every numeric feature is robustly scaled: centred on its median and divided by the first non-zero spread
  of the chain in :func:`robust_scale` (1.4826 x MAD, IQR / 1.349, sqrt(pi/2) x mean absolute deviation);
  a value more than 10,000 robust standard deviations out is compressed logarithmically beyond that bound
  (:mod:`investigator.prepare.magnitudes`), so every method gets finite input whatever magnitude a file holds.

Constant and duplicate columns are dropped with a notice.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

import numpy as np
import pandas as pd

from investigator.errors import InputError
from investigator.io.tables import Table
from investigator.prepare import magnitudes
from investigator.prepare.calendar import Calendar, CalendarView
from investigator.prepare.roles import CATEGORICAL, DATE, NUMERIC, ColumnInfo, parse_numeric

MISSING_LEVEL = "(missing)"
MAD_TO_SD = 1.482602218505602  # 1 / Phi^-1(3/4): MAD of a normal sample estimates 0.6745 sigma
IQR_TO_SD = 1.3489795003921634  # IQR of the standard normal
ROUNDING = 1e-12  # relative to the largest value: spreads below this are rounding, not spread
MEAN_AD_TO_SD = 1.2533141373155003  # sqrt(pi / 2): a normal's mean absolute deviation is sigma sqrt(2 / pi)
LOG_SKEW = 0.15


@dataclass
class FeatureSpec:
    """How one column became one feature; everything needed to apply it to new records."""

    name: str
    role: str
    transform: str = "none"  # none | log | rarity
    offset: float = 0.0  # log(x + offset); offset > 0 only when the column has zeros
    center: float = 0.0
    scale: float = 1.0
    scale_method: str = "MAD"
    fill: float = 0.0  # imputed value, in transformed units
    typical_share: float = 0.0  # categorical: share of the median record's level
    missing: int = 0
    decision: str = ""
    levels: dict[str, float] = field(default_factory=dict)  # categorical: level -> rarity
    bound: float = magnitudes.BOUND  # numbers: robust z beyond which values are compressed logarithmically
    beyond_bound: int = 0  # numbers: records of the fit beyond the bound

    def as_dict(self) -> dict:
        out = asdict(self)
        if self.role != CATEGORICAL:
            out.pop("levels")
        else:
            out["levels"] = len(self.levels)
            out.pop("bound")
            out.pop("beyond_bound")
        return out

    def to_original(self, transformed):
        """Transformed units back to the column's own units (numbers only), within the finite floats."""
        t = np.asarray(transformed, dtype=float)
        if self.transform != "log":
            return t
        with np.errstate(over="ignore"):
            return np.minimum(np.exp(t) - self.offset, magnitudes.FLOAT_MAX)

    def scaled(self, transformed):
        """Transformed units to the scaled units the methods see (numbers; compressed beyond the bound)."""
        return magnitudes.standardise(transformed, self.center, self.scale, self.bound)

    def unscaled(self, scaled):
        """The inverse of :meth:`scaled`."""
        return magnitudes.unstandardise(scaled, self.center, self.scale, self.bound)


@dataclass
class Features:
    """The prepared matrix: ``values`` is n x p, robust-scaled; ``transformed`` is before scaling; ``raw``
    holds the numbers as read (NaN for categories and for cells that were missing or unusable)."""

    names: list[str]
    specs: list[FeatureSpec]
    values: np.ndarray
    transformed: np.ndarray
    imputed: np.ndarray  # n x p booleans: True where a missing or non-finite cell was filled
    raw: np.ndarray
    levels: dict[int, np.ndarray] = field(default_factory=dict)  # categorical column -> level per record

    @property
    def n_features(self) -> int:
        return len(self.names)

    def subset(self, rows: np.ndarray) -> Features:
        """The features of the records at ``rows`` (0-based positions)."""
        return Features(self.names, self.specs, self.values[rows], self.transformed[rows], self.imputed[rows],
                        self.raw[rows], {j: v[rows] for j, v in self.levels.items()})

    def numeric_mask(self) -> np.ndarray:
        return np.array([s.role == NUMERIC for s in self.specs])


def quartile_skewness(x: np.ndarray) -> float:
    """Bowley's quartile skewness (Q3 + Q1 - 2 Q2) / (Q3 - Q1), in [-1, 1]; outliers beyond the
    quartiles do not move it, so it measures the bulk's shape, not the tails the scan is looking for."""
    u = np.ldexp(np.asarray(x, dtype=float), -magnitudes.shift_of(x))  # the ratio is the same; no overflow
    q1, q2, q3 = np.quantile(u, [0.25, 0.5, 0.75])
    return 0.0 if q3 == q1 else float((q3 + q1 - 2 * q2) / (q3 - q1))


def robust_scale(t: np.ndarray, magnitude: float | None = None) -> tuple[float, float, str]:
    """Median and a robust spread that is never zero for values that vary: the first of

    1. 1.4826 x MAD (the median absolute deviation, consistent for the standard deviation of a normal);
    2. IQR / 1.349 (the interquartile range of a normal is 1.349 sigma);
    3. sqrt(pi / 2) x the mean absolute deviation from the median (for a normal, E|X - mu| = sigma sqrt(2 / pi));
       its use when the MAD is zero is common practice for the modified z-score;
    4. 1 ("unit"), for values that are all equal,

    that is above zero. The rule used is returned beside the spread ("MAD", "IQR", "mean absolute
    deviation", "unit"). Ties and integer codes make 1 and 2 zero whenever over half (or three quarters)
    of the values are one value; 3 is zero only when every value is.

    A spread below 1e-12 of ``magnitude`` (default: the largest |value|) is rounding, not spread.
    """
    t = np.asarray(t, dtype=float)
    center = float(np.median(t))
    dev = np.abs(t - center)
    # A spread at the level of floating-point rounding of the values is no spread (a projection of tied
    # values carries noise of 1e-16).
    if magnitude is None:
        magnitude = float(np.max(np.abs(t))) if len(t) else 0.0
    tiny = ROUNDING * magnitude
    mad = float(np.median(dev)) * MAD_TO_SD
    if mad > tiny:
        return center, mad, "MAD"
    q1, q3 = np.quantile(t, [0.25, 0.75])
    if q3 - q1 > tiny:
        return center, float(q3 - q1) / IQR_TO_SD, "IQR"
    mean_ad = float(np.mean(dev)) * MEAN_AD_TO_SD
    if mean_ad > tiny:
        return center, mean_ad, "mean absolute deviation"
    return center, 1.0, "unit"


def column_scale(t: np.ndarray) -> tuple[float, float, str]:
    """:func:`robust_scale` of a column's finite values as read (or logged), for any finite doubles.

    Two differences from the plain chain, both for values near the float limits. The values are first
    brought below 2^1000 by a power of two (exact) so that no deviation overflows, and the result is scaled
    back (a spread that would exceed the largest float is capped there). And rounding is judged against the
    magnitude of the bulk, the larger |quartile|, not the largest |value|: values read from a file are
    exact, and one value of 1e40 must not turn the spread of every other record (2.97 hours, say) into
    'rounding' and the column's scale into 1e36, which would hide every other outlier of the column.
    """
    k = magnitudes.shift_of(t)
    u = np.ldexp(np.asarray(t, dtype=float), -k)
    q1, q3 = np.quantile(u, [0.25, 0.75])
    center, spread, rule = robust_scale(u, magnitude=max(abs(float(q1)), abs(float(q3))))
    with np.errstate(over="ignore"):  # a spread beyond the largest float is capped there
        return float(np.ldexp(center, k)), min(float(np.ldexp(spread, k)), magnitudes.FLOAT_MAX), rule


def column_numbers(values: pd.Series) -> np.ndarray:
    """A column as float64 numbers: dates become days since 1970; text that does not parse becomes NaN."""
    if pd.api.types.is_datetime64_any_dtype(values):
        return (values.astype("datetime64[ns]").astype("int64") / 86_400e9).where(values.notna()).to_numpy(
            dtype=float
        )
    if values.dtype == object or pd.api.types.is_string_dtype(values):
        numbers = parse_numeric(values)
        if numbers.notna().sum() < 0.5 * values.notna().sum():  # a date column forced as a feature
            dates = pd.to_datetime(values, errors="coerce", format="mixed")
            return column_numbers(dates)
        return numbers.to_numpy(dtype=float)
    return values.astype("float64").to_numpy()


class FeaturePreparer:
    """Fit the preparation on reference records; apply it to any records with :meth:`transform`.

    Parameters
    ----------
    log : "auto", "none" or a list of column names to log-transform.
    """

    def __init__(self, log: str | list[str] = "auto", calendar: Calendar | None = None) -> None:
        self.log = log
        self.calendar = calendar  # the calendar parts of date columns, when the scan has any

    def column_values(self, table: Table, name: str, view: CalendarView | None = None) -> pd.Series:
        """The values of feature column ``name`` for the records of ``table``: the column as read, or a
        calendar part or duration computed from its date columns (``view``: the table as the calendar read
        it, to parse its dates once for several parts)."""
        if self.calendar is not None and name in self.calendar.derived_names():
            return (view if view is not None else self.calendar.read(table)).values(name)
        return table.frame[name]

    def _view(self, table: Table) -> CalendarView | None:
        return self.calendar.read(table) if self.calendar is not None else None

    def calendar_hits(self, table: Table, view: CalendarView | None = None) -> list[list[dict]]:
        """The calendar column hits of the records of ``table`` (none without date columns); ``view``: ``table``
        as this preparer's calendar already read it."""
        if self.calendar is None:
            return [[] for _ in range(table.n_rows)]
        return (view if view is not None else self.calendar.read(table)).hits()

    def fit(self, table: Table, columns: list[ColumnInfo], view: CalendarView | None = None) -> FeaturePreparer:
        """Fit on ``table``'s feature columns (``view``: ``table`` as the calendar already read it)."""
        self.notices_: list[str] = []
        self.specs_: list[FeatureSpec] = []
        self.n_fit_ = table.n_rows
        chosen = [c for c in columns if c.is_feature]
        log_cols = self.log if isinstance(self.log, list) else []
        names = {c.name: c for c in chosen}
        for col in log_cols:
            if col not in names or names[col].role != NUMERIC:
                raise InputError(
                    f"{table.name}: `log` names '{col}', which is not a numeric feature; log applies to "
                    "numeric feature columns only", parameters=("log",)
                )
        seen: dict[int, str] = {}
        view = view if view is not None else self._view(table)
        for info in chosen:
            spec = self._fit_column(table, info, log_cols, view)
            if spec is None:
                continue
            column = self.column_values(table, info.name, view)
            digest = int(pd.util.hash_pandas_object(column, index=False).sum())
            if digest in seen and column.equals(self.column_values(table, seen[digest], view)):
                self.notices_.append(
                    f"column '{info.name}' repeats column '{seen[digest]}' value for value; it is dropped"
                )
                continue
            seen[digest] = info.name
            self.specs_.append(spec)
        if not self.specs_:
            raise InputError(
                f"{table.name}: no usable feature columns (numbers or categories with more than one value); "
                "name the columns to use with `features`", parameters=("features",)
            )
        return self

    def _fit_column(self, table: Table, info: ColumnInfo, log_cols: list[str],
                    view: CalendarView | None) -> FeatureSpec | None:
        values = self.column_values(table, info.name, view)
        if info.role == CATEGORICAL:
            levels = values.astype("string").fillna(MISSING_LEVEL)
            share = levels.value_counts(normalize=True, sort=False)
            if len(share) < 2:
                self.notices_.append(f"column '{info.name}' has a single value; it is dropped")
                return None
            # The share of the level a typical record has: the median over records.
            typical = float(np.median(levels.map(share).to_numpy(dtype=float)))
            rarity = {str(k): max(0.0, float(np.log(typical / v))) for k, v in share.items()}
            spec = FeatureSpec(info.name, CATEGORICAL, "rarity", levels=rarity, missing=info.missing,
                               scale_method="rarity", typical_share=typical)
            spec.decision = f"{len(rarity)} levels encoded as rarity"
            if info.missing:
                self.notices_.append(
                    f"column '{info.name}': {info.missing} missing value{'s' if info.missing > 1 else ''} "
                    f"kept as a level of their own, '{MISSING_LEVEL}'"
                )
            return spec
        else:
            x = column_numbers(values)
            bad = ~np.isfinite(x)
            self._note_unusable(table, info, values, x, bad)
            good = x[~bad]
            if len(np.unique(good)) < 2:
                self.notices_.append(f"column '{info.name}' has a single value; it is dropped")
                return None
            spec = FeatureSpec(info.name, NUMERIC, missing=int(bad.sum()))
            self._choose_log(table, spec, good, info.name in log_cols)
            t = self._apply_numeric(spec, x)
        finite = t[np.isfinite(t)]
        spec.fill = magnitudes.median(finite)
        spec.center, spec.scale, spec.scale_method = column_scale(finite)
        spec.beyond_bound = int((np.abs(spec.scaled(finite)) > spec.bound).sum())
        if spec.missing:
            self.notices_.append(
                f"column '{info.name}': {spec.missing} missing value{'s' if spec.missing > 1 else ''} "
                "filled with the median; each record lists its filled columns under 'imputed'"
            )
        return spec

    def _note_unusable(self, table, info, values, x, bad) -> None:
        inf_rows = np.isinf(x).nonzero()[0]
        if len(inf_rows):
            self.notices_.append(
                f"column '{info.name}': {len(inf_rows)} infinite value{'s' if len(inf_rows) > 1 else ''} "
                f"(first in row {inf_rows[0] + 1}) treated as missing"
            )
        unparsed = (bad & values.notna().to_numpy() & ~np.isinf(x)).nonzero()[0]
        if len(unparsed):
            self.notices_.append(
                f"column '{info.name}': {len(unparsed)} cell{'s' if len(unparsed) > 1 else ''} that are not "
                f"numbers (first in row {unparsed[0] + 1}: '{values.iloc[unparsed[0]]}') treated as missing"
            )

    def _choose_log(self, table: Table, spec: FeatureSpec, good: np.ndarray, forced: bool) -> None:
        low = float(good.min())
        if forced:
            if low < 0:
                raise InputError(
                    f"{table.name}: `log` names '{spec.name}', which has negative values (lowest {low:g}); "
                    "a log transform needs values >= 0: drop it from `log`", parameters=("log",)
                )
            self._set_log(spec, good)
            spec.decision = "log (asked for)"
            return
        if self.log != "auto":
            spec.decision = "no log (--log none)" if self.log == "none" else "no log (not named in --log)"
            return
        if low < 0 or len(np.unique(good)) < 10:
            spec.decision = "no log (negative values)" if low < 0 else "no log (few distinct values)"
            return
        before = quartile_skewness(good)
        offset = 0.0 if low > 0 else float(good[good > 0].min()) if (good > 0).any() else 1.0
        after = quartile_skewness(np.log(good + offset))
        if before > LOG_SKEW and abs(after) <= abs(before) / 2:
            self._set_log(spec, good)
            spec.decision = f"log (quartile skewness {before:.2f} -> {after:.2f})"
        else:
            spec.decision = f"no log (quartile skewness {before:.2f})"

    @staticmethod
    def _set_log(spec: FeatureSpec, good: np.ndarray) -> None:
        spec.transform = "log"
        low = float(good.min())
        spec.offset = 0.0 if low > 0 else float(good[good > 0].min()) if (good > 0).any() else 1.0

    @staticmethod
    def _apply_numeric(spec: FeatureSpec, x: np.ndarray) -> np.ndarray:
        with np.errstate(invalid="ignore", divide="ignore"):
            t = np.where(np.isfinite(x), x, np.nan)
            if spec.transform == "log":
                t = np.log(np.maximum(t + spec.offset, 0) if spec.offset else t)
        return np.where(np.isfinite(t), t, np.nan)

    def transform(self, table: Table, view: CalendarView | None = None) -> Features:
        """``table``'s records as prepared features (``view``: ``table`` as the calendar already read it)."""
        frame = table.frame
        n, p = len(frame), len(self.specs_)
        transformed = np.empty((n, p))
        imputed = np.zeros((n, p), dtype=bool)
        raw = np.full((n, p), np.nan)
        level_arrays: dict[int, np.ndarray] = {}
        view = view if view is not None else self._view(table)
        for j, spec in enumerate(self.specs_):
            values = self.column_values(table, spec.name, view)
            if spec.role == CATEGORICAL:
                levels = values.astype("string").fillna(MISSING_LEVEL)
                level_arrays[j] = levels.to_numpy(dtype=object)
                # A level the fit never saw gets the rarity of half a record: rarer than any seen level.
                unseen = float(np.log(spec.typical_share * 2 * self.n_fit_))
                t = levels.map(spec.levels).to_numpy(dtype=float, na_value=unseen)
                imputed[:, j] = False
            else:
                numbers = column_numbers(values)
                t = self._apply_numeric(spec, numbers)
                imputed[:, j] = np.isnan(t)
                raw[:, j] = np.where(imputed[:, j], np.nan, numbers)
                t = np.where(imputed[:, j], spec.fill, t)
            transformed[:, j] = t
        values = np.empty((n, p))
        for j, spec in enumerate(self.specs_):
            # Rarities are used as they are (center 0, scale 1, and never near the bound).
            values[:, j] = spec.scaled(transformed[:, j]) if spec.role != CATEGORICAL else transformed[:, j]
        values += 0.0  # -0.0 becomes 0.0: records equal in value are equal in content (hashes, copies)
        return Features([s.name for s in self.specs_], list(self.specs_), values, transformed, imputed, raw,
                        level_arrays)


def beyond_bound_notices(features: Features, row_numbers) -> list[str]:
    """One notice per numeric feature with values beyond the bound of robust standard deviations: how many,
    the first record's row and value, and that they were compressed (so no method overflows)."""
    out = []
    for j, spec in enumerate(features.specs):
        if spec.role == CATEGORICAL:
            continue
        beyond = np.flatnonzero(np.abs(features.values[:, j]) > spec.bound)
        if not len(beyond):
            continue
        first = int(beyond[0])
        value = features.raw[first, j]
        many = len(beyond) > 1
        out.append(
            f"column '{spec.name}': {len(beyond)} value{'s' if many else ''} more than {spec.bound:,.0f} robust "
            f"standard deviations from the median (first in row {int(row_numbers[first])}: {value:.6g}) "
            f"{'are' if many else 'is'} compressed logarithmically beyond that bound, so every method gets "
            f"finite input; {'they stay' if many else 'it stays'} the most extreme"
        )
    return out


__all__ = ["DATE", "FeaturePreparer", "FeatureSpec", "Features", "beyond_bound_notices", "column_scale", "robust_scale"]
