"""local_density, neighbor_distance and isolation against reference libraries; the shared search."""

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import cdist
from sklearn.ensemble import IsolationForest
from sklearn.neighbors import LocalOutlierFactor

import investigator
from fixtures.calls import row_counts
from investigator.methods.neighbors import NeighborSearch
from investigator.sampling import canonical_order


@pytest.fixture(scope="module")
def scanned():
    rng = np.random.default_rng(1)
    X = rng.normal(size=(300, 5))
    X[:6] += 4
    X[10:14] = rng.normal(-3, 0.1, size=(4, 5))
    result = investigator.scan(pd.DataFrame(X, columns=list("abcde")), log="none")
    return result, result.features.values


def test_local_density_equals_scikit_learn_lof(scanned):
    # Reference library: scikit-learn's LocalOutlierFactor (Breunig et al. 2000), same k, fitted on the
    # same prepared features; its negative_outlier_factor_ is minus the LOF.
    result, Z = scanned
    lof = -LocalOutlierFactor(n_neighbors=20).fit(Z).negative_outlier_factor_
    np.testing.assert_allclose(result.scores("local_density"), lof, rtol=1e-12)


def test_neighbor_distance_equals_brute_force_cdist(scanned):
    # Reference: all pairwise distances by SciPy's cdist; a record's own distance (0) excluded.
    result, Z = scanned
    D = cdist(Z, Z)
    np.fill_diagonal(D, np.inf)
    np.testing.assert_allclose(result.scores("neighbor_distance"), np.sort(D, axis=1)[:, 9], rtol=1e-12)


def test_isolation_equals_scikit_learn_isolation_forest(scanned):
    # Reference: scikit-learn's IsolationForest with the same trees, subsample and seed (Liu et al. 2008),
    # given the records in the same content order (the scan fits on that order, so rows' order cannot matter).
    result, Z = scanned
    forest = IsolationForest(n_estimators=200, max_samples=256, random_state=0).fit(Z[canonical_order(Z)])
    np.testing.assert_allclose(result.scores("isolation"), -forest.score_samples(Z), rtol=1e-12)


def test_isolation_scored_in_blocks_on_every_core_equals_one_pass_of_scikit_learn(monkeypatch):
    # Reference: scikit-learn's score_samples over all records at once; the blocks scored in threads (from
    # PARALLEL_FROM records, lowered here to keep the test quick) must give the same scores to the bit, in
    # record order. Invented data: 1-5 ratings with many exact copies beside zero-inflated amounts.
    from investigator.methods import isolation

    rng = np.random.default_rng(4)
    X = np.column_stack([rng.integers(1, 6, (3000, 3)),
                         np.where(rng.random(3000) < 0.6, 0.0, np.round(rng.lognormal(3, 1, 3000), 2))])
    method = isolation.Isolation()
    method._fit(X)
    monkeypatch.setattr(isolation, "PARALLEL_FROM", 100)
    monkeypatch.setattr(isolation.os, "sched_getaffinity", lambda pid: {0, 1, 2}, raising=False)
    assert np.array_equal(method.score(X), -method.forest_.score_samples(X))


def test_the_neighbour_search_runs_once_per_scan(monkeypatch):
    calls = row_counts(monkeypatch, NeighborSearch, "fit", rows_at=1)
    rng = np.random.default_rng(2)
    investigator.scan(pd.DataFrame(rng.normal(size=(120, 3)), columns=list("abc")), log="none")
    assert calls == [120]


def test_sampled_search_with_the_whole_table_equals_the_exact_search():
    rng = np.random.default_rng(3)
    X = rng.normal(size=(500, 4))
    exact = NeighborSearch(10).fit(X)
    sampled = NeighborSearch(10, sample_above=100, sample_size=500).fit(X)
    assert sampled.mode_ == "sampled"
    g_exact = exact.query(X, same_table=True)
    g_sampled = sampled.query(X, same_table=True)
    # The sampled path searches in float32: the same neighbours, distances to float32 precision.
    np.testing.assert_allclose(g_sampled.distances, g_exact.distances, rtol=1e-5)
    assert (g_sampled.indices == g_exact.indices).mean() > 0.99


def test_sampled_search_never_makes_a_record_its_own_neighbour():
    rng = np.random.default_rng(4)
    X = rng.normal(size=(3000, 3))
    search = NeighborSearch(5, sample_above=1000, sample_size=400, seed=1).fit(X)
    graph = search.query(X, same_table=True)
    own = search.locate(X)  # each record's own location in the sample, -1 when it was not drawn
    assert (own >= 0).sum() == 400
    assert not np.any(graph.indices == own[:, None])
    assert np.all(graph.distances > 0) and np.all(graph.copies == 0)
    assert np.all(np.diff(graph.distances, axis=1) >= 0)


def test_tiny_data_reduces_k_with_a_notice():
    rng = np.random.default_rng(6)
    frame = pd.DataFrame(rng.normal(size=(8, 2)), columns=["a", "b"])
    result = investigator.scan(frame, log="none")
    assert result.run.method_fits["local_density"].parameters["k"] == 7
    assert any("k = 7" in n for n in result.run.notices)
