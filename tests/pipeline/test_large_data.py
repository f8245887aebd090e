"""Large data on one machine: the sampled paths, what the run record says about them, Parquet datasets.

References: scikit-learn's ``roc_auc_score`` and ``NearestNeighbors`` (brute force), NumPy's
``linalg.solve``, and the parameters the data were generated from (ground truth by construction).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import roc_auc_score
from sklearn.neighbors import NearestNeighbors

import investigator
from fixtures.planted import planted_outliers
from investigator.errors import InputError
from investigator.explain import view
from investigator.explain.nearest import _best_pair
from investigator.io.tables import load_table
from investigator.methods.mcd import FastMCD
from investigator.methods.neighbors import NeighborSearch

pytestmark = pytest.mark.slow  # the whole module: tens of thousands of records per test, up to 100,000


def _approximations(result) -> dict:
    return {a.part.split(" (")[0]: a for a in result.run.approximations}


def test_approximate_and_exact_paths_lose_at_most_001_auc_at_100k_rows():
    # The check: generated data with 1% planted outliers, consensus ROC AUC (scikit-learn) of the
    # default (sampled neighbour search) and the --exact path. Six features keep the exact search quick; a
    # shift of 1.5 SD per feature leaves the planted records overlapping the rest, so AUC is not 1 and a
    # loss would show.
    frame, labels = planted_outliers(100_000, 6, seed=3, shift=1.5)
    approx = investigator.scan(frame)
    exact = investigator.scan(frame, exact=True)
    assert approx.run.neighbors.search == "sampled" and exact.run.neighbors.search == "exact"
    auc_approx, auc_exact = roc_auc_score(labels, approx.consensus), roc_auc_score(labels, exact.consensus)
    assert 0.8 < auc_exact < 0.995  # the data are neither trivial nor hopeless
    assert auc_exact - auc_approx <= 0.01, (auc_approx, auc_exact)
    for key in ("local_density", "neighbor_distance"):
        assert roc_auc_score(labels, exact.scores(key)) - roc_auc_score(labels, approx.scores(key)) <= 0.01, key


def test_mcd_on_a_sample_recovers_the_generating_location_and_scatter():
    # Ground truth: 150,000 records, 90% from N(mu, Sigma), 10% shifted far away. The raw fit searched on a
    # 20,000-record sample and reweighted on all records must find the same core as the search on all.
    rng = np.random.default_rng(5)
    mu = np.array([1.0, -2.0, 0.5, 3.0])
    A = rng.normal(size=(4, 4))
    sigma = A @ A.T / 4 + np.eye(4)
    X = rng.multivariate_normal(mu, sigma, size=150_000)
    X[:15_000] += 8.0
    sampled = FastMCD(seed=0).fit(X)
    full = FastMCD(seed=0, sample_above=None).fit(X)
    assert sampled.sample == 20_000 and full.sample is None
    assert not sampled.support[:15_000].any()  # no planted record is kept by the reweighting
    # Sampling error of a mean over ~120,000 records is about 0.003 per unit of scale; 0.03 is ten of them.
    np.testing.assert_allclose(sampled.location, mu, atol=0.03)
    np.testing.assert_allclose(sampled.covariance, sigma, atol=0.06 * np.abs(sigma).max())
    np.testing.assert_allclose(sampled.location, full.location, atol=0.01)
    np.testing.assert_allclose(sampled.covariance, full.covariance, atol=0.02 * np.abs(sigma).max())


def test_the_run_record_names_each_approximation_and_when_it_switches_on():
    frame, _ = planted_outliers(25_000, 3, seed=1)
    default_result = investigator.scan(frame)
    default = _approximations(default_result)
    exact_result = investigator.scan(frame, exact=True)
    exact = _approximations(exact_result)
    assert "Sampled for size: neighbour search" in default_result.summary()
    assert "Sampled for size" not in exact_result.summary()
    assert default["neighbour search"].used and default["neighbour search"].above == 20_000
    assert not exact["neighbour search"].used and exact_result.run.neighbors.search == "exact"
    assert default["robust_distance"].used and default["robust_distance"].above == 20_000
    assert not exact["robust_distance"].used
    assert not default["peers in explanations"].used
    assert default["isolation"].used and not default["isolation"].exact_turns_off


def test_peers_come_from_a_reproducible_sample_of_ordinary_records_above_the_switch(monkeypatch):
    monkeypatch.setattr(view, "PEER_SAMPLE_ABOVE", 500)
    monkeypatch.setattr(view, "PEER_SAMPLE", 300)
    frame, _ = planted_outliers(2_000, 4, seed=2, share=0.03)
    result = investigator.scan(frame)
    pool = result.explainer.pool
    candidates = view.peer_candidates(pool, result.options)
    assert len(candidates) == 300 and np.array_equal(candidates, view.peer_candidates(pool, result.options))
    assert not result.flagged[candidates].any()
    flagged = np.flatnonzero(result.flagged)
    peers, dist = view.find_peers(result, pool, flagged, 5)
    # Reference: brute-force nearest neighbours (scikit-learn) among the same 300 candidates.
    ref = NearestNeighbors(n_neighbors=5, algorithm="brute").fit(result.features.values[candidates])
    ref_dist, ref_idx = ref.kneighbors(result.features.values[flagged])
    np.testing.assert_allclose(dist, ref_dist, rtol=1e-9)
    assert np.array_equal(peers, candidates[ref_idx])
    assert _approximations(result)["peers in explanations"].used
    exact = investigator.scan(frame, exact=True)
    assert len(view.peer_candidates(exact.explainer.pool, exact.options)) == int((~exact.flagged).sum())


def test_the_pair_search_matches_one_solve_per_pair():
    # Reference: for every pair, NumPy's linalg.solve of the 2 x 2 system, the smallest move kept.
    rng = np.random.default_rng(11)
    for trial in range(20):
        p = 6
        A = rng.normal(size=(p, p))
        P = np.linalg.inv(A @ A.T / p + 0.3 * np.eye(p))
        r = rng.normal(0, 3, size=p)
        d2 = float(r @ P @ r)
        c = d2 * rng.uniform(0.3, 0.9)
        Pr = P @ r
        idx = np.arange(p)
        best = None
        for u in range(p):
            for v in range(u + 1, p):
                E = [u, v]
                step = -np.linalg.solve(P[np.ix_(E, E)], Pr[E])
                red = float(-step @ Pr[E])
                if red <= d2 - c:
                    continue
                change = (1 - np.sqrt(1 - (d2 - c) / red)) * step
                if best is None or np.linalg.norm(change) < np.linalg.norm(best[1]):
                    best = ([u, v], change)
        got = _best_pair(P, Pr, idx, idx, d2, c)
        if best is None:
            assert got is None, trial
            continue
        assert got[0] == best[0], trial
        np.testing.assert_allclose(got[1], best[1], rtol=1e-9, atol=1e-12)


def test_top_features_for_the_output_table_match_the_full_explanations():
    frame, _ = planted_outliers(800, 5, seed=4, share=0.03)
    frame["kind"] = np.where(np.arange(800) % 50 == 0, "rare", "usual")
    result = investigator.scan(frame)
    flagged = np.flatnonzero(result.flagged)
    fast = view.top_features_texts(result, flagged)
    full = [view.top_features_text(result.explainer.flagged()[i]) for i in flagged]
    assert fast == full


def test_a_block_of_records_gets_the_neighbours_it_has_in_the_whole_table():
    # A partition of a huge dataset is queried on its own: its records must get the neighbours they get when
    # the whole table is queried (the reference, a sample of it, is the same).
    rng = np.random.default_rng(8)
    X = rng.normal(size=(30_000, 3))
    search = NeighborSearch(5, seed=1).fit(X)
    whole = search.query(X, same_table=True)
    block = search.query(X[12_000:15_000], same_table=True)
    np.testing.assert_array_equal(block.indices, whole.indices[12_000:15_000])
    np.testing.assert_array_equal(block.distances, whole.distances[12_000:15_000])
    np.testing.assert_array_equal(block.copies, whole.copies[12_000:15_000])


# -- Parquet datasets in memory ------------------------------------------------------------------------

def _write_parts(folder, frame, n_parts):
    folder.mkdir()
    for i, rows in enumerate(np.array_split(np.arange(len(frame)), n_parts)):
        frame.iloc[rows].to_parquet(folder / f"part.{i}.parquet", index=False)


def test_a_parquet_folder_or_glob_loads_in_natural_file_order(tmp_path):
    frame, _ = planted_outliers(1_200, 3, seed=6)
    _write_parts(tmp_path / "ds", frame, 12)  # part.10 and part.11 must come after part.9
    (tmp_path / "ds" / "_run.json").write_text("{}")  # markers are not data
    table = load_table(tmp_path / "ds")
    pd.testing.assert_frame_equal(table.frame, frame)
    assert table.source.format == "parquet dataset"
    globbed = load_table(str(tmp_path / "ds" / "part.*.parquet"))
    pd.testing.assert_frame_equal(globbed.frame, frame)


def test_a_dataset_with_mismatched_files_or_no_parquet_is_a_clear_error(tmp_path):
    frame, _ = planted_outliers(100, 3)
    _write_parts(tmp_path / "ds", frame, 2)
    frame.rename(columns={"f0": "other"}).to_parquet(tmp_path / "ds" / "part.2.parquet", index=False)
    with pytest.raises(InputError, match=r"part\.2\.parquet: its columns differ"):
        load_table(tmp_path / "ds")
    (tmp_path / "csvs").mkdir()
    frame.to_csv(tmp_path / "csvs" / "a.csv")
    with pytest.raises(InputError, match=r"matches no Parquet files .* \(it holds \.csv\)"):
        load_table(tmp_path / "csvs")
