"""Benford's law: first-digit and first-two-digits tests on a column of amounts.

Benford's law: in data that span several orders of magnitude and arise from multiplicative processes, the
leading significant digits d occur with probability log10(1 + 1/d) (d = 1..9 for the first digit,
d = 10..99 for the first two digits), so a 1 leads about 30% of the values and a 9 under 5%.

Conformity is judged with the mean absolute deviation MAD = mean_d |observed_d - expected_d| and the ranges of
Nigrini (2012), *Benford's Law: Applications for Forensic Accounting, Auditing, and Fraud Detection*, Wiley —
thresholds as commonly cited, from memory (they could not be checked against the book here):

    first digit:       close <= 0.006, acceptable <= 0.012, marginal <= 0.015, else nonconformity
    first two digits:  close <= 0.0012, acceptable <= 0.0018, marginal <= 0.0022, else nonconformity

A chi-square goodness-of-fit statistic (df = 8 or 89) is reported too. On large samples it rejects for
deviations too small to matter, while the MAD of a given deviation does not grow with the number of values;
this is why the MAD ranges are the usual conformity measure.

The test is about a column as a whole: it needs enough values spanning several orders of magnitude and says
nothing about any one record. The records carrying the most over-represented digits are listed as a place
to start looking, not as findings.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from math import ceil

import numpy as np
import pandas as pd
from scipy import stats

from investigator.errors import InputError

# Nigrini (2012), Wiley — as commonly cited, from memory. Upper MAD bound of each range.
MAD_RANGES: dict[int, tuple[tuple[str, float], ...]] = {
    1: (("close", 0.006), ("acceptable", 0.012), ("marginal", 0.015)),
    2: (("close", 0.0012), ("acceptable", 0.0018), ("marginal", 0.0022)),
}
NONCONFORMITY = "nonconformity"

# Common practice, not a published constant: "a few hundred" values at the least for the first digit. For the
# first two digits we also ask for an expected count of at least 5 in every cell (the usual chi-square rule
# of thumb, common practice), which for P(99) = 0.00436 means 1,146 values.
MIN_VALUES = 300
MIN_EXPECTED_COUNT = 5
# Common practice: Benford's law is expected only of data spanning several orders of magnitude. Measured
# between the 1st and 99th percentiles of |x| so that one extreme record does not decide it.
MIN_ORDERS_OF_MAGNITUDE = 2.0

# Digits are read from the value rounded to 15 significant digits, the precision a double always keeps
# (any decimal with 15 significant digits survives the round trip to a float and back). So 0.1 + 0.2 reads
# as 3, 0.9999999999999999 (a computed 1) as 1, and 99.99999 as 9 / 99. Arithmetic on logarithms is not
# safe: x / 10**floor(log10(x)) gives 0.3 the leading digit 2 and 0.0006 the digit 5.
_SIGNIFICANT = 15

CAUTION = (
    "Benford's law describes a column as a whole: the test needs enough records (a few hundred at least) "
    "spanning several orders of magnitude, and says nothing about one record alone. Amounts bounded by a "
    "range, assigned numbers (invoice or account numbers), prices set by policy and data with a built-in "
    "minimum or maximum are not expected to follow it. A deviation is a lead for a person to review, "
    "not evidence of error or fraud."
)


def digit_values(n_digits: int = 1) -> np.ndarray:
    """The possible leading digits: 1..9 (``n_digits=1``) or 10..99 (``n_digits=2``)."""
    _check_n_digits(n_digits)
    return np.arange(10 ** (n_digits - 1), 10**n_digits)


def expected_proportions(n_digits: int = 1) -> np.ndarray:
    """Benford proportions log10(1 + 1/d), aligned with :func:`digit_values` (they sum to 1)."""
    d = digit_values(n_digits)
    return np.log10(1.0 + 1.0 / d)


def leading_digits(values, n_digits: int = 1) -> np.ndarray:
    """The first (or first two) significant digits of each value, 0 where there are none.

    Parameters
    ----------
    values : array-like of numbers (text that does not parse as a number counts as missing).
    n_digits : 1 or 2.

    Returns an integer array, one entry per value: the leading digit(s) of |x|, or 0 for a zero, missing or
    non-finite value (0 is never a leading digit). A value with a single significant digit has 0 as its
    second digit (5 -> 50, 0.04 -> 40), as its significand 5.0 / 4.0 says. Floats are read at 15 significant
    digits (see the module notes), integers exactly.
    """
    _check_n_digits(n_digits)
    arr = _numeric(values)
    out = np.zeros(arr.shape[0], dtype=np.int64)
    if arr.dtype.kind in "iu":
        usable = arr != 0
    else:
        usable = np.isfinite(arr) & (arr != 0)
    if not usable.any():
        return out
    # Amounts repeat: format each distinct magnitude once.
    uniq, inverse = np.unique(np.abs(arr[usable]), return_inverse=True)
    digits = np.fromiter((_leading(v, n_digits) for v in uniq.tolist()), dtype=np.int64, count=len(uniq))
    out[usable] = digits[inverse.ravel()]
    return out


def mean_absolute_deviation(observed: np.ndarray, expected: np.ndarray) -> float:
    """MAD = mean over the digits of |observed proportion - expected proportion| (Nigrini 2012)."""
    observed, expected = np.asarray(observed, dtype=float), np.asarray(expected, dtype=float)
    return float(np.mean(np.abs(observed - expected)))


def conformity(mad: float, n_digits: int = 1) -> str:
    """Nigrini's conformity range of a MAD: ``close``, ``acceptable``, ``marginal`` or ``nonconformity``.

    Ranges from Nigrini (2012), Benford's Law: Applications for Forensic Accounting, Auditing, and Fraud
    Detection, Wiley — thresholds as commonly cited, from memory (see :data:`MAD_RANGES`).
    """
    _check_n_digits(n_digits)
    for label, upper in MAD_RANGES[n_digits]:
        if mad <= upper:
            return label
    return NONCONFORMITY


def min_values_for(n_digits: int) -> int:
    """Fewest values before a warning (common practice; see :data:`MIN_VALUES`)."""
    return max(MIN_VALUES, ceil(MIN_EXPECTED_COUNT / float(expected_proportions(n_digits).min())))


@dataclass
class BenfordResult:
    """The outcome of one Benford test on one column; arrays are aligned with ``digits``.

    ``excess_positions`` are 0-based positions in the values passed in (``excess_rows`` the same as 1-based
    data rows, the default record key): the records whose leading digit(s) are among ``excess_digits``.
    """

    name: str | None
    n_digits: int
    digits: np.ndarray
    counts: np.ndarray
    observed: np.ndarray
    expected: np.ndarray
    z: np.ndarray  # per digit, signed: one-proportion z with continuity correction 1/(2n)
    n_values: int
    n_used: int
    ignored: dict[str, int]
    mad: float
    conformity: str
    chi2: float
    df: int
    p_value: float
    orders_of_magnitude: float
    magnitude_range: tuple[float, float]
    excess_digits: np.ndarray
    excess_positions: np.ndarray
    warnings: list[str] = field(default_factory=list)
    caution: str = CAUTION

    @property
    def test(self) -> str:
        return "first digit" if self.n_digits == 1 else "first two digits"

    @property
    def excess_rows(self) -> np.ndarray:
        return self.excess_positions + 1

    def as_dict(self) -> dict:
        """Plain JSON-friendly values (NaN becomes None)."""
        return {
            "column": self.name,
            "test": self.test,
            "digits": self.digits.tolist(),
            "counts": self.counts.tolist(),
            "observed": [_num(v) for v in self.observed],
            "expected": [_num(v) for v in self.expected],
            "z": [_num(v) for v in self.z],
            "values": self.n_values,
            "used": self.n_used,
            "ignored": dict(self.ignored),
            "mad": _num(self.mad),
            "conformity": self.conformity,
            "mad_ranges": {label: upper for label, upper in MAD_RANGES[self.n_digits]},
            "mad_ranges_source": ("Nigrini (2012), Benford's Law: Applications for Forensic Accounting, "
                                  "Auditing, and Fraud Detection, Wiley — thresholds as commonly cited, "
                                  "from memory"),
            "chi2": _num(self.chi2),
            "df": self.df,
            "p_value": _num(self.p_value),
            "orders_of_magnitude": _num(self.orders_of_magnitude),
            "magnitude_range": [_num(v) for v in self.magnitude_range],
            "excess_digits": self.excess_digits.tolist(),
            "excess_rows": self.excess_rows.tolist(),
            "warnings": list(self.warnings),
            "caution": self.caution,
        }


def benford_test(values, n_digits: int = 1, *, name: str | None = None, min_abs: float | None = None,
                 top: int = 1) -> BenfordResult:
    """Test a column of numbers against Benford's law (first digit or first two digits).

    Parameters
    ----------
    values : array-like of numbers (a column). Absolute values are used; zeros, missing and non-finite values
        are left out and counted in ``ignored``.
    n_digits : 1 for the first-digit test (9 cells, df = 8), 2 for the first-two-digits test (90 cells,
        df = 89).
    name : the column's name, for messages and output.
    min_abs : leave out values below this in absolute value (an analyst's choice, e.g. small amounts whose
        digits are set by fixed fees); default none.
    top : how many over-represented digits to list records for (those with the largest positive
        observed - expected excess).

    Returns a :class:`BenfordResult`. MAD ranges from Nigrini (2012), Wiley — thresholds as commonly cited,
    from memory; chi-square p-value from scipy.stats.chi2.

    Raises :class:`~investigator.errors.InputError` when no value has a significant digit.
    """
    _check_n_digits(n_digits)
    if top < 1:
        raise InputError(f"top must be at least 1, not {top}")
    label = f"column '{name}'" if name is not None else "the values"
    prefix = f"column '{name}': " if name is not None else ""
    arr = _numeric(values)
    n_values = int(arr.shape[0])
    d = leading_digits(arr, n_digits)
    magnitude = np.abs(arr.astype(float))
    missing = ~np.isfinite(magnitude)
    zero = ~missing & (magnitude == 0)
    below = np.zeros(n_values, dtype=bool)
    if min_abs is not None:
        below = ~missing & ~zero & (magnitude < min_abs)
        d[below] = 0
    used = d > 0
    n = int(used.sum())
    if n == 0:
        raise InputError(f"{label} has no nonzero finite values for the Benford test; choose a column of "
                         "amounts")

    digits = digit_values(n_digits)
    expected = expected_proportions(n_digits)
    counts = np.bincount(d[used] - digits[0], minlength=len(digits))
    observed = counts / n
    mad = mean_absolute_deviation(observed, expected)

    # Pearson's chi-square goodness of fit, df = cells - 1.
    expected_counts = n * expected
    chi2 = float(np.sum((counts - expected_counts) ** 2 / expected_counts))
    df = len(digits) - 1
    p_value = float(stats.chi2.sf(chi2, df))

    # One-proportion z-test per digit with continuity correction 1/(2n) (standard textbook form).
    diff = observed - expected
    se = np.sqrt(expected * (1.0 - expected) / n)
    z = np.sign(diff) * np.maximum(np.abs(diff) - 1.0 / (2 * n), 0.0) / se

    logs = np.log10(magnitude[used])
    q01, q99 = np.quantile(logs, [0.01, 0.99])
    span = float(q99 - q01)
    lo, hi = float(magnitude[used].min()), float(magnitude[used].max())

    excess_digits = _most_over_represented(digits, diff, top)
    positions = np.flatnonzero(used & np.isin(d, excess_digits))

    warnings = []
    need = min_values_for(n_digits)
    if n < need:
        warnings.append(
            f"{prefix}only {n} values used; the {'first-digit' if n_digits == 1 else 'first-two-digits'} "
            f"test wants at least {need} (common practice), so read the result with care")
    if span < MIN_ORDERS_OF_MAGNITUDE:
        warnings.append(
            f"{prefix}the values span {span:.1f} orders of magnitude (1st to 99th percentile); Benford's law "
            f"is expected only of data spanning several (common practice: at least "
            f"{MIN_ORDERS_OF_MAGNITUDE:g}), so a deviation may be the nature of the data")
    n_negative = int(np.sum(used & (arr < 0)))
    if 0 < n_negative < n:
        warnings.append(
            f"{prefix}{n_negative} negative and {n - n_negative} positive values were tested together on "
            "their absolute values; test them apart if they arise differently (e.g. refunds)")

    return BenfordResult(
        name=name, n_digits=n_digits, digits=digits, counts=counts.astype(np.int64), observed=observed,
        expected=expected, z=z, n_values=n_values, n_used=n,
        ignored={"zero": int(zero.sum()), "missing": int(missing.sum()), "below_min": int(below.sum())},
        mad=mad, conformity=conformity(mad, n_digits), chi2=chi2, df=df, p_value=p_value,
        orders_of_magnitude=span, magnitude_range=(lo, hi), excess_digits=excess_digits,
        excess_positions=positions.astype(np.int64), warnings=warnings,
    )


# -- helpers -------------------------------------------------------------------------------------------

def _check_n_digits(n_digits: int) -> None:
    if n_digits not in (1, 2):
        raise InputError(f"the Benford test reads the first digit (1) or the first two digits (2), "
                         f"not {n_digits}")


def _numeric(values) -> np.ndarray:
    """A 1-d array of integers or floats; text that does not parse and pandas' missing markers become NaN."""
    if isinstance(values, pd.Series | pd.Index):
        if isinstance(values.dtype, pd.api.extensions.ExtensionDtype):
            values = pd.to_numeric(values, errors="coerce").astype("Float64").to_numpy(
                dtype=float, na_value=np.nan)
        else:
            values = values.to_numpy()
    arr = np.asarray(values).ravel()
    if arr.dtype.kind in "iu":
        return arr
    if arr.dtype.kind in "fb":
        return arr.astype(float)
    return pd.to_numeric(pd.Series(arr, dtype=object), errors="coerce").to_numpy(dtype=float)


def _leading(v: int | float, n_digits: int) -> int:
    """Leading digit(s) of a positive number: integers exactly, floats at 15 significant digits."""
    if isinstance(v, int):
        s = str(v)
    else:
        s = f"{v:.{_SIGNIFICANT - 1}e}"  # 'd.dddddddddddddde+XX'
        s = s[0] + s[2:_SIGNIFICANT + 1]
    return int((s + "0")[:n_digits])


def _most_over_represented(digits: np.ndarray, diff: np.ndarray, top: int) -> np.ndarray:
    """The ``top`` digits with the largest positive excess (ties at the last place kept), largest first."""
    positive = np.flatnonzero(diff > 0)
    if positive.size == 0:
        return np.array([], dtype=np.int64)
    order = positive[np.argsort(-diff[positive], kind="stable")]
    keep = order[:top]
    # A tie with the last one kept is as over-represented: keep it too (exact ties happen on small data).
    last = diff[keep[-1]]
    ties = order[top:][np.isclose(diff[order[top:]], last, rtol=0, atol=1e-12)]
    return digits[np.concatenate([keep, ties])].astype(np.int64)


def _num(v) -> float | None:
    v = float(v)
    return v if np.isfinite(v) else None
