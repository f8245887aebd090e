"""What to review next: the order of the records without a verdict (docs/learning.md).

Nine of every ten places go to the most likely remaining anomalies, by priority (highest first); every
tenth place goes to the record whose verdict would teach the model most: the one it is least sure about,
``p (1 - p) * sqrt(x^T H^-1 x)`` (the logistic slope at its priority times the posterior spread of its
log-odds, a Laplace approximation; uncertainty sampling), chosen among the next ``CANDIDATES`` (50) records
by priority whose priority is at least 0.5 (more likely an anomaly than not). None comes among the first 20
verdicts, so the first is the 30th (before that the model's uncertainty is mostly its penalty's). The window
keeps the learning picks among records that may well be anomalies: a pick from far down the order teaches as
much but costs the reviewer an anomaly found (the benchmark measured it: 8 fewer found in 100 on a set where
most flagged records are anomalies). When no record in the window qualifies, the place goes to the most
likely record. The share counts the verdicts already given, so a reviewer who records one verdict after
another gets one learning pick per ten verdicts however often the order is recomputed: place k of the order
is a learning pick when ``(verdicts + k) % 10 == 0``.
"""

from __future__ import annotations

import numpy as np

LEARNING_SHARE = 0.1         # the share of places for the records the model is least sure about
EVERY = round(1 / LEARNING_SHARE)  # every tenth
CANDIDATES = 50  # a learning pick is chosen among the next 50 records by priority
WARM_UP = 20  # no learning pick among the first 20 verdicts: the first is the 30th (module docstring)
PLAUSIBLE = 0.5  # ... whose priority is at least this: more likely an anomaly than not (0.5 is the cutoff)
EXPLOIT, LEARN = "likely", "learning"


def review_order(priority: np.ndarray, uncertainty: np.ndarray, reviewed: np.ndarray, consensus_z: np.ndarray,
                 verdicts: int) -> tuple[np.ndarray, np.ndarray]:
    """``order``: per record its 1-based place in the review order (0 for a record with a verdict, which is
    not reviewed again); ``pick``: per record "likely" or "learning" (why it has its place), "" when
    reviewed. Ties in priority go by consensus_z, then file order, so the order is reproducible."""
    n = len(priority)
    todo = np.flatnonzero(~np.asarray(reviewed, dtype=bool))
    by_priority = todo[np.lexsort((todo, -np.asarray(consensus_z)[todo], -np.asarray(priority)[todo]))]
    u = np.asarray(uncertainty, dtype=float)
    p = np.asarray(priority, dtype=float)
    total = len(todo)
    picked = np.zeros(total, dtype=bool)  # by index into by_priority: taken by a learning pick
    is_picked = [False] * total           # the same, read one at a time in the loop (numpy scalars are slow)
    picks: list[tuple[int, int]] = []     # (place, index into by_priority) of every learning pick
    a = 0       # index into by_priority of the next record not yet placed
    placed = 0  # places filled so far, likely and learning
    # Only the learning places need a loop (one in ten); the likely places between them are the priority
    # order itself, less the records already picked, and are filled at once after.
    first = EVERY - verdicts % EVERY
    for place in range(first, total + 1, EVERY):
        if verdicts + place <= WARM_UP:
            continue
        step = place - 1 - placed  # likely places before this one: move past that many unpicked records
        while step > 0:
            if not is_picked[a]:
                step -= 1
            a += 1
        while a < total and is_picked[a]:
            a += 1
        placed = place - 1
        if a >= total:
            break
        # The least sure among the next CANDIDATES by priority (ties: the earlier by priority): a verdict that
        # teaches the model, on a record that may well be an anomaly, not on one far down the order.
        window = np.arange(a, min(total, a + 2 * CANDIDATES))
        window = window[~picked[window]][:CANDIDATES]
        records = by_priority[window]
        plausible = p[records] >= PLAUSIBLE
        if not plausible.any():
            continue  # no plausible anomaly to learn from: the place goes to the most likely record
        chosen = int(window[plausible][int(np.argmax(u[records[plausible]]))])
        picked[chosen] = is_picked[chosen] = True
        picks.append((place, chosen))
        placed = place
    order = np.zeros(n, dtype=np.int64)
    pick = np.full(n, "", dtype=object)
    learning_places = np.array([place for place, _ in picks], dtype=np.int64)
    chosen_records = by_priority[np.array([c for _, c in picks], dtype=np.int64)]
    order[chosen_records] = learning_places
    pick[chosen_records] = LEARN
    likely = by_priority[~picked]
    order[likely] = np.setdiff1d(np.arange(1, total + 1), learning_places)
    pick[likely] = EXPLOIT
    return order, pick
