"""Round amounts: more amounts ending in 00 or 000 than the column's own distribution leads one to expect.

Invented or estimated amounts tend to be round (1,200 rather than 1,187); auditing practice looks at the share
of round amounts (common practice). The screen reads each amount to the cent (``checks.amounts``): an amount
is *round at 00* when it is a whole number of units (no cents: 1,200.00 is, 1,234.50 is not) that is a
multiple of 100, and *round at 000* when it is a multiple of 1,000. Absolute values are used (a refund of
-1,200.00 is round); zeros are left out (a zero is a multiple of everything; zero-inflated columns would
otherwise look round).

What to expect. The test population is the whole-unit amounts (amounts with cents are counted, and are never
round). If their density is smooth, the count expected at a multiple km of m (m = 100 or 1,000) is the mean
count per whole unit among the amounts near it that do not end in 00, over the window km - m/2 .. km + m/2
(the two ends, shared with the next window, weigh one half; the window is cut at the smallest and the
largest whole-unit amount, and multiples outside that range expect nothing). Summed over the multiples, this
gives E_m, and the expected share of round amounts is

    p_m = E_m / (N_other + E_100)

with N_other the whole-unit amounts that do not end in 00 (the denominator is the count of whole-unit amounts
the smooth density implies). The mean over a symmetric window is exact for a density that is linear across
the window, so for amounts spread well above 100 p_100 is close to 1/100 and p_1000 to 1/1,000, while for
amounts over a few hundred it counts the multiples the range holds (uniform whole amounts 1..350: 3/350),
and for amounts below 50 it is 0. This is our own construction from that assumption; near the ends of the
range, where the density is not linear, it is approximate.

The excess is tested with an exact one-sided binomial test (scipy.stats.binomtest, ``alternative="greater"``)
of the round count among the whole-unit amounts against p_m. p_m is itself estimated; the test treats it as
known. The round records are listed; a round amount is a lead, not a finding: fees, prices and limits set by
policy are round by design.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
from scipy import stats

from investigator.checks.amounts import as_floats, check_keys, listed_records, num, read_cents

LEVELS = (100, 1000)
ENDINGS = {100: "00", 1000: "000"}
# Our choice, not a published constant: with fewer whole-unit amounts the expected count of multiples of 100
# is below one half, and only a run of round amounts could show.
MIN_AMOUNTS = 50

CAUTION = (
    "A round amount is a lead, not a finding: fees, prices, deposits and limits set by policy are round by "
    "design. The expected share assumes the whole-unit amounts have a smooth density; test amounts that arise "
    "differently (fixed fees and free amounts) apart."
)


@dataclass
class RoundLevel:
    """One level of roundness: the amounts that are multiples of ``multiple`` (ending in ``ending``)."""

    multiple: int
    count: int
    share: float             # of the whole-unit amounts
    expected_share: float | None
    expected_count: float | None
    p_value: float | None    # one-sided exact binomial test of the excess; None when not tested

    @property
    def ending(self) -> str:
        return ENDINGS[self.multiple]

    def as_dict(self) -> dict:
        return {"ending": self.ending, "multiple": self.multiple, "count": self.count, "share": num(self.share),
                "expected_share": num(self.expected_share), "expected_count": num(self.expected_count),
                "excess": None if self.expected_count is None else num(self.count - self.expected_count),
                "p_value": num(self.p_value)}


@dataclass
class RoundResult:
    """The round-amount screen on one column. ``positions`` are the 0-based positions of the round amounts
    (file order); ``records`` lists them with their row, key, value and ending."""

    name: str | None
    n_values: int
    n_used: int           # nonzero amounts read to the cent or finer
    n_whole: int          # of them, whole-unit amounts (the test population)
    n_other: int          # whole-unit amounts not ending in 00 (the expectation is read from them)
    ignored: dict[str, int]
    levels: list[RoundLevel]
    positions: np.ndarray
    records: list[dict]
    warnings: list[str] = field(default_factory=list)
    caution: str = CAUTION

    def level(self, multiple: int) -> RoundLevel:
        return next(lv for lv in self.levels if lv.multiple == multiple)

    def as_dict(self) -> dict:
        return {
            "column": self.name,
            "screen": "round amounts",
            "values": self.n_values,
            "used": self.n_used,
            "whole_units": self.n_whole,
            "with_cents": self.n_used - self.n_whole,
            "not_round_whole_units": self.n_other,
            "ignored": dict(self.ignored),
            "levels": [lv.as_dict() for lv in self.levels],
            "test": "exact one-sided binomial test (scipy.stats.binomtest) of the round count among the "
                    "whole-unit amounts against the share a smooth density implies",
            "records": list(self.records),
            "warnings": list(self.warnings),
            "caution": self.caution,
        }


def round_amounts(values, *, name: str | None = None, keys: Sequence | None = None,
                  rows: Sequence | np.ndarray | None = None) -> RoundResult:
    """The round-amount screen on a column of amounts (see the module notes).

    Parameters
    ----------
    values : array-like of amounts (text that does not parse counts as missing).
    name : the column's name, for messages and output.
    keys, rows : one record key and one 1-based data row per value, for the listed records (default: the
        position + 1 for both).

    Returns a :class:`RoundResult`; too few whole-unit amounts give a warning and no p-values, never an error.
    """
    x = as_floats(values)
    n_values = int(x.shape[0])
    check_keys(keys, rows, n_values)
    prefix = f"column '{name}': " if name is not None else ""
    reading = read_cents(x)
    whole = reading.whole
    units = reading.units[whole]
    n_used, n_whole = int(reading.used.sum()), int(whole.sum())
    other = units[units % 100 != 0]
    n_other = int(other.size)
    warnings: list[str] = []

    expected: dict[int, float] = {}
    testable = n_whole >= MIN_AMOUNTS
    if not testable:
        cents_note = (f" (the other {n_used - n_whole:,} have cents)" if n_used > n_whole else "")
        warnings.append(f"{prefix}only {n_whole:,} whole-unit amounts{cents_note}; the round-amount test wants "
                        f"at least {MIN_AMOUNTS} (our choice), so it was not run")
    else:
        neighbours = np.sort(other)
        lo, hi = int(units.min()), int(units.max())
        expected = {m: _expected_at_multiples(neighbours, m, lo, hi) for m in LEVELS}

    levels = []
    for m in LEVELS:
        count = int(np.sum(units % m == 0))
        share = count / n_whole if n_whole else float("nan")
        p0 = p_value = expected_count = None
        if testable:
            total = n_other + expected[100]
            p0 = expected[m] / total if total > 0 else 0.0
            expected_count = p0 * n_whole
            if count == 0:
                p_value = 1.0
            elif p0 > 0:
                p_value = float(stats.binomtest(count, n_whole, p0, alternative="greater").pvalue)
            else:
                warnings.append(f"{prefix}no amount that does not end in 00 lies within {m // 2:,} of the "
                                f"{count:,} amounts ending in {ENDINGS[m]}, so their density gives nothing to "
                                "expect there; not tested")
        levels.append(RoundLevel(m, count, share, p0, expected_count, p_value))

    n_negative = int(reading.negative.sum())
    if 0 < n_negative < n_used:
        warnings.append(f"{prefix}{n_negative:,} negative and {n_used - n_negative:,} positive amounts were "
                        "screened together on their absolute values; screen them apart if they arise "
                        "differently (e.g. refunds)")
    if reading.ignored["too_large"]:
        warnings.append(f"{prefix}{reading.ignored['too_large']:,} amounts of 10^13 or more were left out "
                        "(their cents are beyond the 15 significant digits a number keeps)")

    is_round = np.zeros(n_values, dtype=bool)
    is_round[whole] = units % 100 == 0
    positions = np.flatnonzero(is_round)
    endings = np.where(reading.units[positions] % 1000 == 0, "000", "00")
    records = listed_records(positions, x, keys, rows, {"ending": endings})
    return RoundResult(name=name, n_values=n_values, n_used=n_used, n_whole=n_whole, n_other=n_other,
                       ignored=dict(reading.ignored), levels=levels, positions=positions.astype(np.int64),
                       records=records, warnings=warnings)


def _expected_at_multiples(neighbours: np.ndarray, m: int, lo: int, hi: int) -> float:
    """E_m: the expected count of whole-unit amounts at the multiples of ``m`` in [lo, hi], each the mean count
    per whole unit of the sorted ``neighbours`` (whole units not ending in 00) in its window (module notes)."""
    if neighbours.size == 0:
        return 0.0
    h = m // 2
    # The multiples whose window holds a neighbour: the nearest one of each, and the one below at a tie.
    k = np.unique(np.concatenate([(neighbours + h) // m, -((h - neighbours) // m)]))
    km = k[k >= 1] * m
    km = km[(km >= lo) & (km <= hi)]
    if km.size == 0:
        return 0.0
    a, b = np.maximum(km - h, lo), np.minimum(km + h, hi)
    count = (np.searchsorted(neighbours, b, side="right") - np.searchsorted(neighbours, a, side="left")).astype(float)
    # Whole units in [a, b] that do not end in 00 (km itself is a multiple of 100, so it is not among them).
    units = (b - a + 1) - (b // 100 + (-a) // 100 + 1)
    weight = units.astype(float)
    for end, inside in ((km - h, km - h >= lo), (km + h, km + h <= hi)):
        at_end = np.searchsorted(neighbours, end, side="right") - np.searchsorted(neighbours, end, side="left")
        half = inside & (end % 100 != 0)
        count -= 0.5 * np.where(half, at_end, 0)
        weight -= 0.5 * half
    ok = weight > 0
    return float(np.sum(count[ok] / weight[ok]))
