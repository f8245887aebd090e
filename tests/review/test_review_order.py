"""The review order (investigator/review/review_order.py): nine places in ten by priority, every tenth a
learning pick among the next records by priority, records with a verdict left out. The shares are ours
(docs/learning.md); the checks count them."""

from __future__ import annotations

import numpy as np

from investigator.review.review_order import CANDIDATES, EVERY, LEARN, WARM_UP, review_order


def _case(n: int = 400, seed: int = 0):
    rng = np.random.default_rng(seed)
    priority = rng.random(n)
    uncertainty = rng.random(n)
    z = rng.normal(size=n)
    return priority, uncertainty, z


def test_every_record_without_a_verdict_gets_one_place_and_reviewed_ones_none():
    priority, uncertainty, z = _case()
    reviewed = np.zeros(400, dtype=bool)
    reviewed[[3, 50, 77]] = True
    order, pick = review_order(priority, uncertainty, reviewed, z, verdicts=30)
    assert sorted(order[~reviewed].tolist()) == list(range(1, 398))
    assert (order[reviewed] == 0).all() and (pick[reviewed] == "").all()


def test_one_place_in_ten_is_a_learning_pick_counting_the_verdicts_given():
    priority, uncertainty, z = _case()
    priority = 0.5 + priority / 2  # every record a plausible anomaly: every tenth place can be a learning pick
    order, pick = review_order(priority, uncertainty, np.zeros(400, dtype=bool), z, verdicts=WARM_UP + 3)
    places = np.sort(order[pick == LEARN])
    assert places[0] == EVERY - 3  # (verdicts + place) % 10 == 0
    assert np.array_equal(np.diff(places), np.full(len(places) - 1, EVERY))
    assert len(places) == 400 // EVERY


def test_the_likely_places_follow_the_priority_and_a_learning_pick_is_among_the_next_candidates():
    priority, uncertainty, z = _case(seed=4)
    priority = 0.5 + priority / 2
    order, pick = review_order(priority, uncertainty, np.zeros(400, dtype=bool), z, verdicts=WARM_UP)
    by_place = np.argsort(order)
    likely = [i for i in by_place if pick[i] != LEARN]
    assert np.all(np.diff(priority[likely]) <= 0)
    by_priority = np.argsort(-priority)
    first_learning = by_place[EVERY - 1]
    assert pick[first_learning] == LEARN
    window = [i for i in by_priority[:EVERY - 1 + CANDIDATES] if i not in set(by_place[:EVERY - 1])][:CANDIDATES]
    assert first_learning == max(window, key=lambda i: uncertainty[i])


def test_no_learning_pick_before_the_warm_up_or_without_a_plausible_anomaly():
    priority, uncertainty, z = _case()
    order, pick = review_order(priority, uncertainty, np.zeros(400, dtype=bool), z, verdicts=0)
    assert (pick[order <= WARM_UP] != LEARN).all()
    low = priority * 0.4  # every priority below 0.5: no record the model calls more likely anomalous than not
    order, pick = review_order(low, uncertainty, np.zeros(400, dtype=bool), z, verdicts=WARM_UP)
    assert (pick != LEARN).all()
    assert np.array_equal(np.argsort(order), np.argsort(-low, kind="stable"))


def test_ties_in_priority_go_by_consensus_then_file_order():
    priority = np.full(6, 0.3)
    z = np.array([1.0, 2.0, 2.0, 0.5, 3.0, 1.0])
    order, _ = review_order(priority, np.zeros(6), np.zeros(6, dtype=bool), z, verdicts=0)
    assert np.argsort(order).tolist() == [4, 1, 2, 0, 5, 3]


def _place_by_place(priority, uncertainty, reviewed, z, verdicts):
    """The rule as the module docstring states it, one place at a time (slow, plain): the reference."""
    n = len(priority)
    todo = [i for i in range(n) if not reviewed[i]]
    by_priority = sorted(todo, key=lambda i: (-priority[i], -z[i], i))
    taken: set[int] = set()
    order = np.zeros(n, dtype=int)
    for place in range(1, len(todo) + 1):
        rest = [i for i in by_priority if i not in taken]
        i = rest[0]
        if (verdicts + place) % EVERY == 0 and verdicts + place > WARM_UP:
            window = [j for j in rest[:CANDIDATES] if priority[j] >= 0.5]
            if window:
                i = max(window, key=lambda j: (uncertainty[j], -rest.index(j)))
        taken.add(i)
        order[i] = place
    return order


def test_the_fast_order_is_the_rule_place_by_place():
    for seed, verdicts in [(1, 0), (2, 23), (3, 57), (4, 20)]:
        priority, uncertainty, z = _case(n=300, seed=seed)
        priority = np.where(np.arange(300) % 3 == 0, priority * 0.4, priority)  # some implausible records
        reviewed = np.random.default_rng(seed).random(300) < 0.1
        order, _ = review_order(priority, uncertainty, reviewed, z, verdicts)
        assert np.array_equal(order, _place_by_place(priority, uncertainty, reviewed, z, verdicts))
