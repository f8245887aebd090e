"""HDBSCAN with brute-force core distances (investigator.structure.density) against scikit-learn's own
HDBSCAN and k-d tree (the reference library), on data like users' data."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.cluster import HDBSCAN
from sklearn.neighbors import KDTree

from investigator import sampling
from investigator.structure import density


def _tables() -> dict[str, np.ndarray]:
    """Invented tables of 8 or more features (the brute-force path), each with its awkward part."""
    rng = np.random.default_rng(7)
    three = np.vstack([rng.normal(0, 1, (1500, 8)),                      # three clusters of unequal size
                       rng.normal(6, 0.4, (500, 8)),                     # and shape
                       rng.normal(-5, 2.5, (250, 8)) * [1, 3, 1, 1, 1, 1, 1, 0.3]])
    codes = rng.integers(1, 6, (2000, 9)).astype(float)                  # 1-5 ratings: ties everywhere
    amounts = np.where(rng.random((2000, 8)) < 0.7, 0.0, np.round(rng.lognormal(4, 1, (2000, 8)), 2))
    copies = np.repeat(rng.normal(size=(100, 10)), 20, axis=0)           # every record 20 times
    return {"three clusters": rng.permutation(three), "ratings": codes,
            "zero-inflated amounts": np.log1p(amounts), "exact copies": rng.permutation(copies)}


def _reference(X: np.ndarray, min_cluster_size: int, min_samples: int) -> np.ndarray:
    order = sampling.canonical_order(X)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)
        found = HDBSCAN(min_cluster_size=min_cluster_size, min_samples=min_samples, copy=True).fit(X[order]).labels_
    labels = np.empty(len(X), dtype=int)
    labels[order] = found
    return labels


@pytest.mark.parametrize("name", list(_tables()))
@pytest.mark.parametrize(("min_cluster_size", "min_samples"), [(5, 5), (100, 10)])
def test_the_labels_are_scikit_learns_hdbscan_labels(name, min_cluster_size, min_samples):
    X = _tables()[name]
    assert X.shape[1] > density.TREE_UP_TO  # the brute-force path, not the estimator itself
    expected = _reference(X, min_cluster_size, min_samples)
    got = density.hdbscan_labels(X, min_cluster_size, min_samples)
    assert np.array_equal(got, expected)
    if name == "three clusters" and min_cluster_size == 100:
        assert got.max() == 2  # the check can fail: three clusters are there to be found


@pytest.mark.parametrize("name", list(_tables()))
@pytest.mark.parametrize("k", [1, 5, 10])
def test_core_distances_are_the_k_d_trees_to_the_last_bit(name, k):
    X = np.ascontiguousarray(_tables()[name])
    tree = KDTree(X).query(X, k)[0][:, -1]
    assert np.array_equal(density.core_distances(X, k), tree)


def test_shuffled_rows_give_the_same_clusters():
    X = _tables()["three clusters"]
    order = np.random.default_rng(1).permutation(len(X))
    assert np.array_equal(density.hdbscan_labels(X[order], 100, 10), density.hdbscan_labels(X, 100, 10)[order])


def test_without_scikit_learns_private_steps_the_estimator_gives_the_same_labels(monkeypatch):
    X = _tables()["ratings"]
    fast = density.hdbscan_labels(X, 5, 5)
    monkeypatch.setattr(density, "_steps", lambda: None)
    assert np.array_equal(density.hdbscan_labels(X, 5, 5), fast)


def test_few_features_use_the_estimator_itself():
    X = np.random.default_rng(2).normal(size=(600, 3))
    assert np.array_equal(density.hdbscan_labels(X, 5, 5), _reference(X, 5, 5))


@pytest.mark.parametrize(("rows", "min_samples"), [(1, 1), (50, 0), (50, 51)])
def test_impossible_settings_are_refused_with_the_allowed_range(rows, min_samples):
    with pytest.raises(ValueError, match="min_samples"):
        density.hdbscan_labels(np.zeros((rows, 9)), 5, min_samples)
