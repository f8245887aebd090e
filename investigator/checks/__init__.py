"""Screens auditors expect beside the multivariate methods: Benford's law digit tests and duplicate records.

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

__all__ = [
    "BenfordResult",
    "DuplicateGroup",
    "DuplicateReport",
    "benford_test",
    "conformity",
    "duplicates_on",
    "exact_duplicates",
    "expected_proportions",
    "leading_digits",
    "mean_absolute_deviation",
]
