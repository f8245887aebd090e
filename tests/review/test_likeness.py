"""Likeness to records marked benign (investigator/review/likeness.py), on small arrays whose distances can be
worked out by hand: who is like whom, copies, one verdict on several identical records, the step and the cap,
and the reason text."""

from __future__ import annotations

import numpy as np

from investigator.review.learning import LIKENESS_STEP
from investigator.review.likeness import LIKENESS_CAP, benign_likeness


def _line(n: int) -> np.ndarray:
    return np.column_stack([np.arange(n, dtype=float), np.zeros(n)])  # records 1 apart on a line


def test_a_record_is_like_the_benign_records_within_its_radius_and_not_like_itself():
    X = _line(10)
    benign = np.array([4, 5])
    case_of = np.full(10, -1)
    case_of[benign] = [0, 1]
    found = benign_likeness(X, benign, case_of, np.full(10, 1.5))
    # Record 3 is 1 from record 4 and 2 from record 5; record 4 is 1 from 5 and not like itself.
    assert found.count.tolist() == [0, 0, 0, 1, 1, 1, 1, 0, 0, 0]
    assert found.nearest[3] == 4 and found.nearest[4] == 5 and found.nearest[6] == 5
    assert found.shift[3] == -LIKENESS_STEP and found.shift[0] == 0


def test_an_exact_copy_is_like_with_radius_zero_and_one_verdict_on_copies_counts_once():
    X = np.array([[0.0, 0.0], [0.0, 0.0], [0.0, 0.0], [5.0, 5.0], [0.0, 0.0]])
    benign = np.array([0, 1, 2])  # three identical records under one verdict (no key: matched by content)
    case_of = np.array([0, 0, 0, -1, -1])
    found = benign_likeness(X, benign, case_of, np.zeros(5))
    assert found.count.tolist() == [0, 0, 0, 0, 1]  # the fourth copy, not under the verdict, is like them once
    assert found.nearest[4] == 0


def test_the_lowering_stops_at_the_cap_and_the_reason_names_the_nearest():
    X = np.vstack([np.column_stack([np.arange(12) * 0.01, np.zeros(12)]), [[0.051, 0.0]]])
    benign = np.arange(12)
    case_of = np.r_[np.arange(12), -1]
    found = benign_likeness(X, benign, case_of, np.full(13, 1.0))
    assert found.count[12] == 10  # the nearest ten benign locations are looked at
    assert found.shift[12] == -LIKENESS_CAP
    keys = [f"CLM-{10230 + i}" for i in range(13)]
    assert found.reason(12, keys) == "like CLM-10235 and 9 others marked benign"
    assert found.reason(12, keys).startswith("like CLM-1023")
    one = benign_likeness(X, np.array([3]), np.r_[-np.ones(3), 0, -np.ones(9)].astype(int), np.full(13, 1.0))
    assert one.reason(12, keys) == "like CLM-10233 marked benign"
    assert one.reason(3, keys) == ""  # the benign record itself is like no other benign record


def test_no_benign_records_lower_nothing():
    found = benign_likeness(_line(5), np.array([], dtype=int), np.full(5, -1), np.ones(5))
    assert (found.count == 0).all() and (found.shift == 0).all()
