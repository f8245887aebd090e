"""local_density: the local outlier factor."""

from __future__ import annotations

import numpy as np

from .base import Method


class LocalDensity(Method):
    """Local outlier factor: how much sparser a record's neighbourhood is than its neighbours'.

    Breunig, M. M., Kriegel, H.-P., Ng, R. T. & Sander, J. (2000), "LOF: identifying density-based local
    outliers", SIGMOD. Computed from the shared neighbour graph exactly as scikit-learn's
    ``LocalOutlierFactor`` does (reachability distances, local reachability density with a 1e-10 guard).

    Parameters
    ----------
    k : neighbours (MinPts); 20 is scikit-learn's default and within the paper's advised 10-50.

    Fitted attributes: ``k_distance_`` and ``lrd_`` of the reference records.
    """

    key = "local_density"
    score_units = "local outlier factor (about 1 for a typical record)"

    def __init__(self, *, k: int = 20, cutoff: float = 0.975, contamination: float | None = None) -> None:
        super().__init__(cutoff=cutoff, contamination=contamination)
        self.k = k
        self.needs_neighbors = k

    def parameters(self) -> dict:
        return {"k": int(self.k_)}

    def _lrd(self, graph, k):
        reach = np.maximum(graph.distances[:, :k], self.k_distance_[graph.indices[:, :k]])
        return 1.0 / (reach.mean(axis=1) + 1e-10)

    def _fit(self, X, neighbors):
        self.k_ = min(self.k, neighbors.k)
        self.k_distance_ = neighbors.distances[:, self.k_ - 1]
        self.lrd_ = self._lrd(neighbors, self.k_)
        return self.score(X, neighbors)

    def score(self, X, neighbors):
        lrd = self._lrd(neighbors, self.k_)
        return (self.lrd_[neighbors.indices[:, : self.k_]] / lrd[:, None]).mean(axis=1)
