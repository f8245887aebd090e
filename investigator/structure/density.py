"""HDBSCAN's clusters, with the core distances found by a brute-force search.

HDBSCAN (Campello, Moulavi & Sander 2013, "Density-based clustering based on hierarchical density
estimates") starts from every record's core distance: the distance to its ``min_samples``-th nearest record,
itself counted. scikit-learn's ``HDBSCAN`` finds them with a k-d tree, which in 20 dimensions visits nearly
every leaf: on 8,000 x 20 records the tree's search took 2.9 s where a brute-force search (matrix products)
takes 0.2 s, and the search was three quarters of HDBSCAN's time (measured on the 2-core development
machine). :func:`hdbscan_labels` finds the candidates by brute force, computes their distances again exactly
as the tree computes them (the square root of a sum of squared differences taken feature after feature, so
the core distances are the tree's to the last bit, exact copies at distance 0), and hands them to
scikit-learn's own minimum spanning tree and cluster selection: the labels are scikit-learn's HDBSCAN labels
(tested against it on smooth, clustered, integer-coded and copy-heavy data).

Those two steps are private functions of scikit-learn; if a release moves them, the public ``HDBSCAN`` is
used instead (same labels, the slower search).
"""

from __future__ import annotations

import warnings

import numpy as np

from investigator import sampling

# Candidates per record beyond min_samples: a brute-force distance is a few units in the last place off,
# enough to swap two near-equal neighbours, never to push the true k-th one this far down.
MARGIN = 10
# Up to this many features the k-d tree is as quick as the brute-force search (8,000 records: 0.25 s each at
# 6 features; 0.62 s against 0.21 s at 8, 2.2 s against 0.24 s at 15), and scikit-learn's estimator runs whole.
TREE_UP_TO = 6
BLOCK = 512  # records searched again at a time (their distances: BLOCK x n floats)


def hdbscan_labels(X: np.ndarray, min_cluster_size: int, min_samples: int) -> np.ndarray:
    """Cluster labels of HDBSCAN (Euclidean distance, excess-of-mass selection, -1 for noise) on the records
    of X, given in content order (:func:`investigator.sampling.canonical_order`) because HDBSCAN breaks ties
    in input order; the labels are returned in the order of X's rows."""
    X = np.ascontiguousarray(X, dtype=np.float64)
    if len(X) < 2 or not 1 <= min_samples <= len(X):
        raise ValueError(f"HDBSCAN needs 2 or more records and 1 <= min_samples <= {len(X)}")
    order = sampling.canonical_order(X)
    found = _labels(np.ascontiguousarray(X[order]), min_cluster_size, min_samples)
    labels = np.empty(len(X), dtype=int)
    labels[order] = found
    return labels


def _labels(X: np.ndarray, min_cluster_size: int, min_samples: int) -> np.ndarray:
    steps = _steps() if X.shape[1] > TREE_UP_TO else None
    if steps is None:  # few features, or a scikit-learn that moved its steps: its public estimator, same labels
        from sklearn.cluster import HDBSCAN

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FutureWarning)  # the default of `copy` is changing; we pass it
            return HDBSCAN(min_cluster_size=min_cluster_size, min_samples=min_samples, copy=True).fit(X).labels_
    spanning_tree, single_linkage, select, metric = steps
    tree = spanning_tree(X, core_distances(X, min_samples), metric.get_metric("euclidean"), 1.0)
    # HDBSCAN's defaults: excess of mass, no single cluster, epsilon 0, no largest size.
    labels, _ = select(single_linkage(tree), min_cluster_size, "eom", False, 0.0, None)
    return labels


def _steps():
    """scikit-learn's minimum spanning tree over mutual reachability, its single-linkage tree, its cluster
    selection and its distance metrics, or None where a release has moved them."""
    try:
        from sklearn.cluster._hdbscan._linkage import mst_from_data_matrix
        from sklearn.cluster._hdbscan.hdbscan import _process_mst, tree_to_labels
        from sklearn.metrics import DistanceMetric
    except ImportError:
        return None
    return mst_from_data_matrix, _process_mst, tree_to_labels, DistanceMetric


def core_distances(X: np.ndarray, k: int) -> np.ndarray:
    """Per record, the distance to its k-th nearest record of X, itself included (so k=1 gives 0), computed
    as scikit-learn's k-d tree computes it."""
    from sklearn.neighbors import NearestNeighbors

    n = len(X)
    width = min(n, k + MARGIN)
    rough, idx = NearestNeighbors(n_neighbors=width, algorithm="brute").fit(X).kneighbors(X, width)
    core = np.partition(_exact(X, X, idx), k - 1, axis=1)[:, k - 1].copy()
    if width == n:
        return core
    # A record with more records about as near as its k-th one than were kept (ties: integer codes, copies)
    # is searched again among all of them; at distance 0 nothing can be nearer.
    norms = np.einsum("ij,ij->i", X, X)
    slack = 1e-9 * (1.0 + norms + norms.max())  # far above the rounding error of a matrix-product distance
    again = np.flatnonzero((rough[:, -1] ** 2 <= core**2 + slack) & (core > 0))
    for start in range(0, len(again), BLOCK):
        rows = again[start:start + BLOCK]
        squared = norms[rows, None] + norms[None, :] - 2.0 * (X[rows] @ X.T)
        for i, r in enumerate(rows):
            near = np.flatnonzero(squared[i] <= core[r] ** 2 + slack[r])
            core[r] = np.partition(_exact(X[r:r + 1], X, near[None, :])[0], k - 1)[k - 1]
    return core


def _exact(A: np.ndarray, X: np.ndarray, idx: np.ndarray) -> np.ndarray:
    """Distances from each row of A to the rows idx[i] of X, summed feature after feature as scikit-learn's
    distance metrics sum them (numpy's own sums add in pairs and differ in the last place)."""
    total = np.zeros(idx.shape)
    for j in range(X.shape[1]):
        d = A[:, j][:, None] - X[idx, j]
        total += d * d
    return np.sqrt(total)
