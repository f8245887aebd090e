"""Kinds of normal inside peer-group segments: a segment starts from the whole table's kinds, not a search of its own.

The data are invented travel claims of a fictional survey firm: two kinds of trip of unequal size (day trips,
about 70%: some 40 km and 60.00 in expenses; overnight trips, about 30%: some 300 km and 400.00), distances in
whole kilometres and amounts to the cent, in three departments. Two departments have both kinds in number; the
third ("archive") has only a handful of overnight trips, fewer than a large cluster of its records, so it is one
kind there. The rows are shuffled.

References outside the code under test: the kind each claim was drawn from (known by construction), and a count
of the HDBSCAN searches made (``hdbscan_labels`` as structure/kinds.py calls it), so that a segment is seen not
to search again.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import investigator
from fixtures.calls import row_counts
from investigator.methods.mcd import FastMCD
from investigator.structure import kinds as kinds_module
from investigator.structure.kinds import find_kinds, large_size

pytestmark = pytest.mark.slow  # a whole scan and one per segment (some seconds)

SEED = 11
DEPARTMENTS = {"field": (700, 300), "survey": (500, 250), "archive": (395, 5)}  # day trips, overnight trips


def claims(seed: int = 2, departments=DEPARTMENTS) -> tuple[pd.DataFrame, np.ndarray]:
    """The claims and the kind each was drawn from (0 day trip, 1 overnight)."""
    rng = np.random.default_rng(seed)
    parts, drawn = [], []
    for department, (day, night) in departments.items():
        for kind, n, km, spend in ((0, day, 40, 60.0), (1, night, 300, 400.0)):
            parts.append(pd.DataFrame({
                "department": department,
                "km": np.round(rng.normal(km, 0.15 * km, n)).astype(int),
                "expenses": np.round(rng.normal(spend, 0.12 * spend, n), 2),
                "meals": rng.integers(0, 2, n) + (2 * kind),
            }))
            drawn.append(np.full(n, kind))
    frame = pd.concat(parts, ignore_index=True)
    truth = np.concatenate(drawn)
    frame.insert(0, "claim", [f"TC-{i:05d}" for i in range(len(frame))])
    order = np.random.default_rng(seed + 1).permutation(len(frame))
    return frame.iloc[order].reset_index(drop=True), truth[order]


def agreement(a: np.ndarray, b: np.ndarray) -> float:
    """Share of records on which two two-kind labellings agree, up to the kinds' numbering."""
    same = float(np.mean(a == b))
    return max(same, 1.0 - same)


@pytest.fixture(scope="module")
def scanned():
    frame, truth = claims()
    return frame, truth, investigator.scan(frame, id="claim", within="department", seed=SEED, cache=False)


def test_the_whole_table_has_the_two_kinds_of_trip(scanned):
    frame, truth, result = scanned
    assert result.kinds is not None and result.kinds.n_kinds == 2
    assert agreement(result.kinds.labels, truth) >= 0.99


def test_a_segment_with_both_kinds_keeps_them_from_the_whole_table(scanned):
    frame, truth, result = scanned
    w = result.within
    for idx, fit in w.fits.items():
        rows = w.positions[idx]
        department = frame["department"].to_numpy()[rows[0]]
        if department == "archive":
            continue
        assert fit.kinds is not None and fit.kinds.n_kinds == 2, department
        assert fit.kinds.parameters["method"].startswith("the whole table's kinds as candidates")
        assert agreement(fit.kinds.labels, truth[rows]) >= 0.99, department


def test_a_segment_with_a_handful_of_one_kind_is_one_kind(scanned):
    # 5 overnight trips among 400 claims: fewer than a large cluster of them (5% of 400 = 20, at least 25).
    frame, truth, result = scanned
    w = result.within
    archive = [idx for idx, rows in w.positions.items() if frame["department"].to_numpy()[rows[0]] == "archive"]
    assert len(archive) == 1
    assert w.fits[archive[0]].kinds is None


def test_segments_do_not_search_for_kinds_again(monkeypatch):
    calls = row_counts(monkeypatch, kinds_module, "hdbscan_labels")  # HDBSCAN's candidates, one call per search
    frame, _ = claims()
    result = investigator.scan(frame, id="claim", within="department", seed=SEED, cache=False)
    assert len(result.within.fits) == 3
    assert calls == [len(frame)]  # the whole table's search only


def test_a_table_of_one_kind_has_segments_of_one_kind(monkeypatch):
    frame, _ = claims(departments={"field": (700, 0), "survey": (500, 0), "archive": (395, 0)})
    result = investigator.scan(frame, id="claim", within="department", seed=SEED, cache=False)
    assert result.kinds is None
    assert len(result.within.fits) == 3
    assert all(fit.kinds is None for fit in result.within.fits.values())


def test_carried_candidates_too_small_here_are_dropped():
    # Three candidate kinds, one with 10 members among 600 (a large cluster is 30): two kinds are left, and the
    # ten records go to the kind they are nearest to. Reference: the kinds the records were drawn from.
    rng = np.random.default_rng(4)
    X = np.vstack([rng.normal(0, 1, (400, 3)), rng.normal(8, 1, (190, 3)), rng.normal(4, 0.3, (10, 3))])
    truth = np.repeat([0, 1, 2], [400, 190, 10])
    assert large_size(len(X)) == 30
    kinds = find_kinds(X, np.arange(3), FastMCD(seed=1, n_starts=50), seed=1, candidates=truth)
    assert kinds is not None and kinds.n_kinds == 2
    assert agreement(kinds.labels[truth < 2], truth[truth < 2]) == 1.0
    # One candidate kind only (the other below the size): no kinds.
    one = np.where(np.arange(len(X)) < 580, 0, 1)
    assert find_kinds(X, np.arange(3), FastMCD(seed=1, n_starts=50), seed=1, candidates=one) is None
