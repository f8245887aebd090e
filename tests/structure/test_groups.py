"""Small groups versus lone outliers, large clusters as kinds of normal, and group profiles.

The reference in every check is the planted truth of generated data (seed fixed): which rows were made
near-duplicates, which were placed alone, which cluster each ordinary record was drawn from.
"""

import numpy as np
import pandas as pd
import pytest

import investigator
from investigator.methods.mcd import FastMCD
from investigator.structure import find_groups, group_profile
from investigator.structure import groups as groups_module
from investigator.structure import kinds as kinds_module
from investigator.structure.kinds import find_kinds

A, B, EIGHT, FIVE = np.arange(0, 600), np.arange(600, 900), np.arange(900, 908), np.arange(908, 913)


def planted(seed: int = 0, p: int = 4) -> np.ndarray:
    """Two Gaussian clusters (600 and 300 records, 8 apart in every feature), eight near-duplicates far
    from both, and five lone points far from everything and from each other; p features (p >= 4)."""
    rng = np.random.default_rng(seed)
    lone = np.array([[25, -15, 0, 0], [-20, -20, 0, 0], [0, 0, 25, 0], [0, 0, -20, 5], [0, 25, -10, 0]])
    pad = np.zeros((5, p - 4))
    return np.vstack([
        rng.normal(size=(600, p)),
        rng.normal(size=(300, p)) + 8,
        np.r_[-10, 10, np.zeros(p - 2)] + 0.05 * rng.normal(size=(8, p)),
        np.hstack([lone, pad]) + 0.5 * rng.normal(size=(5, p)),
    ])


def grouped(X: np.ndarray, flagged: np.ndarray, seed: int = 0):
    """The scan's structure step on prepared features X: kinds of normal, then groups."""
    kinds = find_kinds(X, np.arange(X.shape[1]), FastMCD(seed=seed), seed=seed)
    return find_groups(X, flagged, seed=seed, kind_labels=None if kinds is None else kinds.labels)


def fringe(X: np.ndarray, rows: np.ndarray, k: int = 3) -> np.ndarray:
    """The k records of a cluster farthest from its own centre: what a scan plausibly also flags."""
    d = np.linalg.norm(X[rows] - np.median(X[rows], axis=0), axis=1)
    return rows[np.argsort(d)[-k:]]


@pytest.fixture(scope="module", params=[4, 12], ids=["4 features", "12 features"])
def data(request):
    # In 12 dimensions HDBSCAN's large-cluster run hangs the far points on the clusters' branches, so
    # that run is where the closeness rule is needed.
    X = planted(p=request.param)
    flagged = np.zeros(len(X), dtype=bool)
    flagged[EIGHT] = flagged[FIVE] = True
    flagged[fringe(X, A)] = flagged[fringe(X, B)] = True
    return X, flagged, grouped(X, flagged, seed=0)


@pytest.mark.slow
def test_eight_near_duplicates_are_one_group_of_eight(data):
    # Reference: the planted truth; the eight were generated as one near-duplicate batch.
    X, flagged, g = data
    assert len(g.small_ids) == 1
    gid = g.small_ids[0]
    np.testing.assert_array_equal(g.members(gid), EIGHT)
    assert g.size_of(gid) == 8
    assert list(g.pattern[EIGHT]) == ["group"] * 8
    assert g.record(int(EIGHT[0])) == {"pattern": "group", "group": gid, "group_size": 8,
                                       "in_large_cluster": False}


def test_five_lone_points_are_isolated_and_in_no_group(data):
    # Reference: the planted truth; each of the five was placed alone. Every record belongs to the kind of
    # normal it is nearest to, so their id is a large cluster's, never a group's.
    X, flagged, g = data
    assert list(g.pattern[FIVE]) == ["isolated"] * 5
    assert all(g.is_large(int(gid)) for gid in g.group[FIVE])


def test_two_clusters_are_two_kinds_of_normal(data):
    # Reference: the planted truth; each ordinary record was drawn from cluster A or cluster B. Neither
    # cluster may be taken for outliers of the other: each is its own large cluster, every one of its
    # members belongs to it (nearest kind), none is in a group, and no member carries the other's id.
    X, flagged, g = data
    assert len(g.large_ids) == 2
    for rows, other in ((A, B), (B, A)):
        labels = g.group[rows]
        own = np.bincount(labels[labels > 0]).argmax()
        assert g.is_large(own)
        assert (labels == own).all()
        assert own not in set(g.group[other])
        assert "group" not in set(g.pattern[rows])
        assert set(g.pattern[rows][~flagged[rows]]) == {None}
    # Ids run from 1 by size: cluster A (600) first, then B (300), then the eight.
    assert list(g.ids) == [1, 2, 3] and list(g.sizes[:2]) == sorted(g.sizes[:2], reverse=True)
    assert g.group[A[0]] == 1 and g.group[B[0]] == 2


@pytest.mark.slow
def test_a_flagged_second_cluster_is_still_a_kind_of_normal():
    # Reference: the planted truth. A single centre would flag all of cluster B (it is far from the bulk
    # of A); B is still a large cluster, not a group, and the eight are still exactly one group.
    X = planted()
    flagged = np.zeros(len(X), dtype=bool)
    flagged[B] = flagged[EIGHT] = flagged[FIVE] = True
    g = grouped(X, flagged, seed=0)
    labels = g.group[B]
    own = np.bincount(labels[labels > 0]).argmax()
    assert g.is_large(own) and (labels == own).all()
    assert "group" not in set(g.pattern[B])
    assert [g.members(s).tolist() for s in g.small_ids] == [EIGHT.tolist()]


@pytest.mark.slow
def test_same_seed_same_groups_on_the_sampled_path(monkeypatch):
    # Large data are clustered on samples; shrink the thresholds so this 913-record table takes that path.
    # Reference: the planted truth (the flagged eight are never sampled away) and the run itself (same
    # seed, same result).
    monkeypatch.setattr(kinds_module, "SAMPLE", 500)
    monkeypatch.setattr(groups_module, "GROUP_SET", 400)
    X = planted(seed=3)
    flagged = np.zeros(len(X), dtype=bool)
    flagged[EIGHT] = flagged[FIVE] = True
    flagged[fringe(X, A, 10)] = True
    kinds = find_kinds(X, np.arange(4), FastMCD(seed=5), seed=5)
    assert kinds.parameters["sample"] == 500 and kinds.n_kinds == 2
    first, again = grouped(X, flagged, seed=5), grouped(X, flagged, seed=5)
    assert first.parameters["group_set"] == 400
    np.testing.assert_array_equal(first.group, again.group)
    np.testing.assert_array_equal(first.pattern, again.pattern)
    assert [first.members(s).tolist() for s in first.small_ids] == [EIGHT.tolist()]
    assert list(first.pattern[FIVE]) == ["isolated"] * 5
    other = grouped(X, flagged, seed=6)  # another sample: the same group comes out
    assert [other.members(s).tolist() for s in other.small_ids] == [EIGHT.tolist()]


@pytest.mark.slow
def test_a_lone_point_beside_the_group_is_not_a_member():
    # Reference: the planted truth. A keying error 4 units from the batch of eight (which is 0.05 wide)
    # is nearer to the batch than to anything else, so HDBSCAN hangs it on the batch's branch; it is not
    # one of the batch, and stays isolated.
    X = planted()
    X = np.vstack([X, [-10, 14, 0, 0]])
    flagged = np.zeros(len(X), dtype=bool)
    flagged[EIGHT] = flagged[FIVE] = flagged[-1] = True
    g = grouped(X, flagged, seed=0)
    assert [g.members(s).tolist() for s in g.small_ids] == [EIGHT.tolist()]
    assert g.pattern[-1] == "isolated" and g.is_large(int(g.group[-1]))


@pytest.mark.slow
def test_unflagged_dense_spot_is_not_a_group(data):
    # The rule: a group needs at least half of its members flagged. Reference: the planted truth; with
    # only one of the eight flagged they are a dense spot of mostly ordinary records.
    X, _, _ = data
    flagged = np.zeros(len(X), dtype=bool)
    flagged[EIGHT[0]] = flagged[FIVE[0]] = True
    g = grouped(X, flagged, seed=0)
    assert g.small_ids == []
    assert g.pattern[EIGHT[0]] == "isolated" and g.pattern[EIGHT[1]] is None


@pytest.fixture(scope="module")
def scanned():
    """400 invented batch records; rows 50-57 are one batch with a planted high `viscosity`, on the
    rarely used line `L9`, all on one date."""
    rng = np.random.default_rng(11)
    n = 400
    frame = pd.DataFrame({
        "batch": [f"B{1000 + i}" for i in range(n)],
        "made_on": pd.date_range("2025-01-01", periods=n, freq="D").strftime("%Y-%m-%d"),
        "line": rng.choice(["L1", "L2", "L3", "L4"], n),
        "temperature": rng.normal(180, 4, n).round(1),
        "viscosity": rng.normal(52, 3, n).round(2),
        "yield_pct": rng.normal(94, 1.5, n).round(2),
        "density": rng.normal(1.02, 0.01, n).round(4),
    })
    rows = np.arange(50, 58)
    frame.loc[rows, "viscosity"] = (52 + 6 * 3 + rng.normal(0, 0.3, len(rows))).round(2)
    frame.loc[rows, "line"] = "L9"
    frame.loc[rows, "made_on"] = "2025-03-01"
    result = investigator.scan(frame, id="batch", log="none")
    return frame, rows, result


def test_profile_names_the_planted_features(scanned):
    # Reference: the planted truth (viscosity and line were set for the batch); the typical values are
    # checked against numpy's median and plain shares computed on the table as generated.
    frame, rows, result = scanned
    g = find_groups(result.features.values, result.flagged, seed=0)
    found = [s for s in g.small_ids if set(g.members(s)) & set(rows)]
    assert len(found) == 1
    members = g.members(found[0])
    np.testing.assert_array_equal(members, rows)
    mask = np.zeros(len(frame), dtype=bool)
    mask[members] = True
    profile = group_profile(mask, result.features, result.table.frame)
    used = [r for r in profile if r.used]
    assert {r.feature for r in used[:2]} == {"viscosity", "line"}
    by_name = {r.feature: r for r in profile}
    visc = by_name["viscosity"]
    assert visc.direction == "higher" and visc.difference > 4
    assert visc.group == pytest.approx(np.median(frame.viscosity[mask]))
    assert visc.rest == pytest.approx(np.median(frame.viscosity[~mask]))
    assert visc.group_range == pytest.approx([frame.viscosity[mask].min(), frame.viscosity[mask].max()])
    line = by_name["line"]
    assert line.group == "L9" and line.group_share == 1.0 and line.rest_share == 0.0
    # The rest never has L9: its share counts as half a record of the rest.
    assert line.difference == pytest.approx(np.log(1.0 / (0.5 / (~mask).sum())))
    # The date the scan did not use is listed after the features, as shared by the whole batch.
    assert by_name["made_on"].used is False and by_name["made_on"].group == "2025-03-01"
    assert profile.index(by_name["made_on"]) >= len(used)
    assert "batch" not in by_name  # a key is never shared


def test_profile_rejects_an_empty_group(scanned):
    _, _, result = scanned
    with pytest.raises(ValueError):
        group_profile(np.zeros(len(result.features.values), dtype=bool), result.features)
