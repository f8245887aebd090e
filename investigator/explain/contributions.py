"""Per-method feature contributions: which features made a record's score, additive where the method allows.

* robust_distance: the exact Shapley decomposition of the squared robust Mahalanobis distance,
  phi_j = (x - mu)_j * (S^-1 (x - mu))_j (Mayrhofer & Filzmoser 2023, "Multivariate outlier explanations
  using Shapley values and Mahalanobis distances"). The phi_j sum to the squared distance. A negative phi_j
  means the feature, given the others, brings the record closer to the centre: its deviation runs along the
  correlation the others would predict.
* neighbor_distance: the squared Euclidean distance to the k-th nearest neighbour (the distance the score is)
  split per feature, (x_j - o_j)^2; sums to the squared score.
* local_density: the mean squared Euclidean distance to the records of the neighbourhood LOF compares (its k
  distinct neighbouring locations, each as often as records sit there, and its own copies at distance 0)
  split per feature, mean over them of (x_j - o_j)^2; sums to that mean.
* isolation: for every tree, each split on the record's path counts 1 / (nodes on the path, leaf included)
  for its feature (a short path, an easy isolation, weighs more), summed over trees and normalised to
  shares; in the spirit of
  DIFFI (Carletti, Terzi & Susto 2023, "Interpretable anomaly detection with DIFFI"). Not additive in the
  score; shares only.

* hotelling (reference mode): the same Shapley split of T-squared with the reference mean and covariance.

Each function returns an m x p array of contribution values for the m requested records (features the method
did not use are 0). Shares are value / sum of values over features.
"""

from __future__ import annotations

import numpy as np


def robust_fit_labels(result, positions: np.ndarray) -> tuple[list[tuple[np.ndarray, np.ndarray]], np.ndarray]:
    """The fits robust_distance measured the records at ``positions`` against: a list of (location,
    precision) and, per record, the index of its fit (its kind of normal, or 0)."""
    kinds = result.kinds
    if kinds is None:
        m = result.method_results["robust_distance"].method
        return [(m.mcd_.location, m.precision_)], np.zeros(len(positions), dtype=int)
    return ([(f.location, np.linalg.inv(f.covariance)) for f in kinds.fits],
            np.asarray(kinds.labels)[positions])


def robust_distance_contributions(result, positions: np.ndarray, X: np.ndarray) -> np.ndarray:
    method = result.method_results["robust_distance"].method
    cols = method.columns_
    out = np.zeros(X.shape)
    fits, labels = robust_fit_labels(result, positions)
    for k in np.unique(labels):  # each record against the fit it is measured by (its kind of normal)
        rows = labels == k
        location, precision = fits[k]
        R = X[rows][:, cols] - location
        out[np.ix_(rows, cols)] = R * (R @ precision)
    return out


def neighbor_distance_contributions(method, X: np.ndarray, neighbors, locations: np.ndarray) -> np.ndarray:
    _, col = neighbors.kth(method.k_)
    copy = col < 0  # the k-th neighbour is an exact copy: nothing separates the record from it
    other = locations[neighbors.indices[np.arange(len(X)), np.maximum(col, 0)]]
    return np.where(copy[:, None], 0.0, (X - other) ** 2)


def local_density_contributions(method, X: np.ndarray, neighbors, locations: np.ndarray) -> np.ndarray:
    L = neighbors.indices[:, : method.k_]
    w = neighbors.counts[L].astype(float)  # records at each neighbouring location; own copies add 0
    others = locations[L]  # m x k x p
    total = neighbors.copies + w.sum(axis=1)
    return np.einsum("mk,mkp->mp", w, (X[:, None, :] - others) ** 2) / total[:, None]


def isolation_contributions(method, X: np.ndarray) -> np.ndarray:
    forest = method.forest_
    out = np.zeros(X.shape)
    for tree, features in zip(forest.estimators_, forest.estimators_features_, strict=True):
        Xt = X[:, features]
        paths = tree.decision_path(Xt).tocsr()  # m x nodes, the nodes each record passes
        inner = tree.tree_.children_left != -1
        length = np.diff(paths.indptr)  # nodes on the path, leaf included: edges + 1
        rows = np.repeat(np.arange(len(X)), length)
        nodes = paths.indices
        split = inner[nodes]
        weight = 1.0 / length[rows[split]]
        np.add.at(out, (rows[split], features[tree.tree_.feature[nodes[split]]]), weight)
    return out


def shares(values: np.ndarray) -> np.ndarray:
    total = values.sum(axis=-1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(total != 0, values / total, 0.0)


def method_contributions(result, positions: np.ndarray) -> dict[str, np.ndarray]:
    """Contribution values per method key for the records at ``positions`` (0-based)."""
    X = result.features.values[positions]
    out = {}
    for key, r in result.method_results.items():
        m = r.method
        if key == "robust_distance":
            out[key] = robust_distance_contributions(result, positions, X)
        elif key == "isolation":
            out[key] = isolation_contributions(m, X)
        elif key == "hotelling":
            values = np.zeros(X.shape)
            values[:, m.columns_] = m.contributions(X)
            out[key] = values
        else:
            sub = result.graph.subset(positions)
            ref = result.neighbors.locations_
            if key == "neighbor_distance":
                out[key] = neighbor_distance_contributions(m, X, sub, ref)
            else:
                out[key] = local_density_contributions(m, X, sub, ref)
    return out
