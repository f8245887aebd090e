"""Screens auditors expect beside the multivariate methods: Benford's law digit tests, duplicate records,
round amounts, amounts just below an approval threshold and Nigrini's last-two-digits test.

A screen looks at a whole column or at groups of records; it does not score records one by one and does not
vote in the combination. See docs/screens.md.
"""

from __future__ import annotations

from investigator.checks.benford import (
    BenfordResult,
    benford_test,
    conformity,
    expected_proportions,
    leading_digits,
    mean_absolute_deviation,
)
from investigator.checks.duplicates import DuplicateGroup, DuplicateReport, duplicates_on, exact_duplicates
from investigator.checks.last_digits import LastDigitsResult, last_two_digits
from investigator.checks.round_amounts import RoundLevel, RoundResult, round_amounts
from investigator.checks.thresholds import ThresholdResult, parse_thresholds, threshold_test

__all__ = [
    "BenfordResult",
    "DuplicateGroup",
    "DuplicateReport",
    "LastDigitsResult",
    "RoundLevel",
    "RoundResult",
    "ThresholdResult",
    "benford_test",
    "conformity",
    "duplicates_on",
    "exact_duplicates",
    "expected_proportions",
    "last_two_digits",
    "leading_digits",
    "mean_absolute_deviation",
    "parse_thresholds",
    "round_amounts",
    "threshold_test",
]
