"""neighbor_distance: distance to the k-th nearest neighbour."""

from __future__ import annotations

from investigator.methods.base import Method


class NeighborDistance(Method):
    """Distance from a record to its k-th nearest other record, in the scaled feature space.

    Ramaswamy, S., Rastogi, R. & Shim, K. (2000), "Efficient algorithms for mining outliers from large data
    sets", SIGMOD. Exact copies are records like any other: a record with k or more copies has distance 0.

    Parameters
    ----------
    k : which neighbour's distance is the score (default 10).

    Fitted attributes: ``k_`` (k, or fewer on tiny data).
    """

    key = "neighbor_distance"
    score_units = "distance to the k-th nearest neighbour (scaled units)"

    def __init__(self, *, k: int = 10, cutoff: float = 0.975, contamination: float | None = None) -> None:
        super().__init__(cutoff=cutoff, contamination=contamination)
        self.k = k
        self.needs_neighbors = k

    def parameters(self) -> dict:
        return {"k": int(self.k_)}

    def _fit(self, X, neighbors):
        self.k_ = max(1, min(self.k, neighbors.n_reference_ - 1))
        return self.score(X, neighbors.reference_graph_)

    def score(self, X, neighbors=None):
        if neighbors is None:
            raise TypeError("neighbor_distance scores records from their neighbour graph (NeighborSearch.query)")
        return neighbors.kth(self.k_)[0]
