"""Nigrini's last-two-digits test: the last two digits of the whole-unit part of amounts, against uniform.

Nigrini (2012), *Benford's Law: Applications for Forensic Accounting, Auditing, and Fraud Detection*, Wiley —
from memory, not checked against the book here: the last-two-digits test is run on amounts of 10 or more,
and under no invention or rounding each of the 100 pairs 00..99 is expected with probability 1/100. It looks
for invented numbers and for rounding (an excess of 00, 50, ...) and for amounts repeated by a process
(a fixed fee shows as its own pair).

The digits read here are the tens and units of the whole-unit part of |x| (the two digits before the decimal
point): 1,234.50 gives 34, 10 gives 10, 4,900 gives 00. Cents are not read. Amounts are read to the cent at
15 significant digits (``checks.amounts``), so 1199.9999999999998 (a computed 1,200) gives 00. Amounts below
10 (one digit before the point), zeros, missing values and amounts of 10**13 or more are left out and counted.

Goodness of fit: Pearson's chi-square over the 100 pairs, df = 99 (scipy.stats.chisquare against the uniform
expectation n/100). Per pair, a signed one-proportion z-value with continuity correction 1/(2n) (the textbook
form the Benford screen uses). The pairs with the largest excess over n/100 are listed with their records.

Caveats (common practice): the chi-square rule of thumb wants an expected count of 5 per pair, 500 amounts; for
amounts of two digits (10..99) the last two digits are also the first two, which Benford's law says are not
uniform, so a column of mostly small amounts deviates by its nature.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
from scipy import stats

from investigator.checks.amounts import as_floats, check_keys, listed_records, num, read_cents
from investigator.errors import InputError

MIN_AMOUNT = 10            # Nigrini (2012), from memory: the test is for amounts of 10 or more
MIN_VALUES = 500           # an expected count of 5 in each of the 100 cells (chi-square rule of thumb, common practice)
SMALL_SHARE = 0.10         # our choice: warn when more than this share of the amounts tested are below 100
PAIRS = np.arange(100)

CAUTION = (
    "The last-two-digits test describes a column as a whole: an excess of a pair points to rounding, invented "
    "amounts or an amount repeated by a process (a fixed fee), and the records carrying it are a place to "
    "start looking, not findings."
)


@dataclass
class LastDigitsResult:
    """Nigrini's last-two-digits test on one column; arrays are aligned with the pairs 0..99.

    ``excess_pairs``: the pairs with the largest positive excess; ``positions`` the 0-based positions of the
    records carrying them (file order); ``records`` lists them with their row, key, value and pair.
    """

    name: str | None
    counts: np.ndarray
    observed: np.ndarray
    z: np.ndarray
    n_values: int
    n_used: int
    ignored: dict[str, int]
    chi2: float | None
    df: int
    p_value: float | None
    excess_pairs: np.ndarray
    positions: np.ndarray
    records: list[dict]
    warnings: list[str] = field(default_factory=list)
    caution: str = CAUTION

    def as_dict(self) -> dict:
        return {
            "column": self.name,
            "test": "last two digits",
            "digits": "tens and units of the whole-unit part, amounts of 10 or more",
            "source": "Nigrini (2012), Benford's Law, Wiley: amounts >= 10, each pair 1/100 (from memory)",
            "pairs": [f"{p:02d}" for p in PAIRS],
            "counts": self.counts.tolist(),
            "observed": [num(v) for v in self.observed],
            "expected": 0.01,
            "z": [num(v) for v in self.z],
            "values": self.n_values,
            "used": self.n_used,
            "ignored": dict(self.ignored),
            "chi2": num(self.chi2),
            "df": self.df,
            "p_value": num(self.p_value),
            "excess_pairs": [f"{p:02d}" for p in self.excess_pairs.tolist()],
            "records": list(self.records),
            "warnings": list(self.warnings),
            "caution": self.caution,
        }


def last_two_digits(values, *, name: str | None = None, keys: Sequence | None = None,
                    rows: Sequence | np.ndarray | None = None, top: int = 3) -> LastDigitsResult:
    """Nigrini's last-two-digits test on a column of amounts (see the module notes).

    Parameters
    ----------
    values : array-like of amounts; absolute values are used.
    name, keys, rows : as for :func:`investigator.checks.round_amounts.round_amounts`.
    top : how many over-represented pairs to list records for (largest excess first; a tie at the last
        place is kept).

    Returns a :class:`LastDigitsResult`; a column with no amount of 10 or more gives a warning and no test.
    """
    if top < 1:
        raise InputError(f"top must be at least 1, not {top}")
    x = as_floats(values)
    n_values = int(x.shape[0])
    check_keys(keys, rows, n_values)
    prefix = f"column '{name}': " if name is not None else ""
    reading = read_cents(x)
    small = reading.used & (reading.units < MIN_AMOUNT)
    used = reading.used & ~small
    pair = np.where(used, reading.units % 100, -1)
    n = int(used.sum())
    counts = np.bincount(pair[used], minlength=100).astype(np.int64)
    ignored = {**reading.ignored, "below_10": int(small.sum())}
    warnings = []
    chi2 = p_value = None
    if n == 0:
        observed = np.full(100, np.nan)
        z = np.full(100, np.nan)
        excess = np.array([], dtype=np.int64)
        warnings.append(f"{prefix}no amount of 10 or more; the last-two-digits test was not run")
    else:
        fit = stats.chisquare(counts)  # uniform expectation n/100 in each cell
        chi2, p_value = float(fit.statistic), float(fit.pvalue)
        observed = counts / n
        diff = observed - 0.01
        z = np.sign(diff) * np.maximum(np.abs(diff) - 1.0 / (2 * n), 0.0) / np.sqrt(0.01 * 0.99 / n)
        excess = _largest_excess(counts - n / 100, top)
        if n < MIN_VALUES:
            warnings.append(f"{prefix}only {n:,} amounts of 10 or more; the last-two-digits test wants at least "
                            f"{MIN_VALUES} (an expected count of 5 per pair, common practice), so read it with care")
        two_digit = int(np.sum(used & (reading.units < 100)))
        if two_digit > SMALL_SHARE * n:
            warnings.append(f"{prefix}{two_digit:,} of the {n:,} amounts are below 100, where the last two digits "
                            "are also the first two (not uniform by Benford's law); a deviation may be the "
                            "nature of the data")
    positions = np.flatnonzero(used & np.isin(pair, excess))
    records = listed_records(positions, x, keys, rows, {"pair": np.array([f"{p:02d}" for p in pair[positions]])})
    return LastDigitsResult(name=name, counts=counts, observed=observed, z=z, n_values=n_values, n_used=n,
                            ignored=ignored, chi2=chi2, df=99, p_value=p_value, excess_pairs=excess,
                            positions=positions.astype(np.int64), records=records, warnings=warnings)


def _largest_excess(excess: np.ndarray, top: int) -> np.ndarray:
    """The ``top`` pairs with the largest positive excess, largest first; a tie with the last one is kept."""
    positive = np.flatnonzero(excess > 0)
    if positive.size == 0:
        return np.array([], dtype=np.int64)
    order = positive[np.argsort(-excess[positive], kind="stable")]
    keep = order[:top]
    ties = order[top:][np.isclose(excess[order[top:]], excess[keep[-1]], rtol=0, atol=1e-9)]
    return np.concatenate([keep, ties]).astype(np.int64)
