"""The neighbour search, computed once per scan and shared by every method that needs neighbours.

Two paths, and the run record says which one ran:

* ``exact``: every record's k nearest other records (Euclidean, in the scaled feature space), found with
  scikit-learn's ``NearestNeighbors`` (tree or brute force, chosen by scikit-learn, as its
  ``LocalOutlierFactor`` does), so local_density equals scikit-learn's LOF on the same data.
* ``sampled``: above ``SAMPLE_ABOVE`` records, neighbours are searched among a reproducible random reference
  sample of ``SAMPLE_SIZE`` records (Sugiyama & Borgwardt 2013, "Rapid distance-based outlier detection via
  sampling"); a sampled record never counts as its own neighbour. Cost grows linearly in rows. The sampled
  search runs in float32 (distances agree with float64 to about 1e-6 relative).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

SAMPLE_ABOVE = 20_000
SAMPLE_SIZE = 10_000
_CHUNK = 2048


@dataclass
class NeighborGraph:
    """k nearest reference records for each queried record (self excluded), nearest first.

    ``indices`` point into the reference set (``reference_rows`` maps them to data rows).
    """

    indices: np.ndarray
    distances: np.ndarray
    reference_rows: np.ndarray

    @property
    def k(self) -> int:
        return self.indices.shape[1]


class NeighborSearch:
    """Fit on reference records, then find neighbours of any records among them.

    Parameters
    ----------
    k : number of neighbours to keep (the largest any method needs).
    exact : force the exact search even for large data.
    seed : seed of the reference sample (sampled path only).
    """

    def __init__(self, k: int, *, exact: bool = False, seed: int = 0,
                 sample_above: int = SAMPLE_ABOVE, sample_size: int = SAMPLE_SIZE) -> None:
        self.k = k
        self.exact = exact
        self.seed = seed
        self.sample_above = sample_above
        self.sample_size = sample_size

    def fit(self, X: np.ndarray, rows: np.ndarray | None = None) -> NeighborSearch:
        """Fit on reference records ``X``; ``rows`` are their data rows (default 0..n-1), so that a record
        that is also a reference record is never its own neighbour."""
        n = len(X)
        rows = np.arange(n) if rows is None else np.asarray(rows)
        self.k_ = min(self.k, n - 1)
        if self.exact or n <= self.sample_above:
            self.mode_ = "exact"
            chosen = np.arange(n)
        else:
            self.mode_ = "sampled"
            rng = np.random.default_rng([self.seed, 7])
            chosen = np.sort(rng.choice(n, size=min(self.sample_size, n), replace=False))
        self.reference_rows_ = rows[chosen]
        self.reference_ = X[chosen]
        from sklearn.neighbors import NearestNeighbors

        # The sampled path searches in float32, about twice as fast; distances are kept in float64 after.
        self.dtype_ = np.float32 if self.mode_ == "sampled" else np.float64
        self.index_ = NearestNeighbors(n_neighbors=self.k_).fit(self.reference_.astype(self.dtype_))
        self.reference_graph_ = self._self_graph()
        return self

    def _self_graph(self) -> NeighborGraph:
        dist, idx = self.index_.kneighbors(None, n_neighbors=min(self.k_, len(self.reference_) - 1))
        return NeighborGraph(idx, dist.astype(float), self.reference_rows_)

    def query(self, X: np.ndarray, rows: np.ndarray | None = None) -> NeighborGraph:
        """Neighbours of ``X`` among the reference. ``rows`` are the data rows of X when X is from the
        fitted table, so that a record that is itself in the reference is not its own neighbour."""
        k = self.reference_graph_.k
        if self.mode_ == "exact" and rows is not None and len(rows) == len(self.reference_rows_) and (
            np.array_equal(rows, self.reference_rows_)
        ):
            return self.reference_graph_
        if rows is None:
            dist, idx = self.index_.kneighbors(X.astype(self.dtype_), n_neighbors=k)
            return NeighborGraph(idx, dist.astype(float), self.reference_rows_)
        # Each queried record's place in the reference (-1: not in it), by binary search so that the cost
        # follows the records asked for, however large their row numbers (a partition of a big dataset).
        order = np.argsort(self.reference_rows_, kind="stable")
        ref = self.reference_rows_[order]
        at = np.minimum(np.searchsorted(ref, rows), len(ref) - 1)
        own = np.where(ref[at] == rows, order[at], -1)
        # Indices point into the reference; int32 holds any reference and halves the graph's memory.
        out_i = np.empty((len(X), k), dtype=np.int32 if len(self.reference_rows_) < 2**31 else np.intp)
        out_d = np.empty((len(X), k))
        for start in range(0, len(X), _CHUNK):
            stop = min(start + _CHUNK, len(X))
            dist, idx = self.index_.kneighbors(X[start:stop].astype(self.dtype_), n_neighbors=k + 1)
            mine = own[start:stop, None]
            keep = idx != mine
            # Records not in the reference keep their first k; those in it drop their own entry.
            keep[:, -1] &= ~keep[:, :-1].all(axis=1)
            out_i[start:stop] = idx[keep].reshape(-1, k)
            out_d[start:stop] = dist[keep].reshape(-1, k)
        return NeighborGraph(out_i, out_d, self.reference_rows_)

    def describe(self) -> dict:
        out = {"search": self.mode_, "k": int(self.reference_graph_.k), "metric": "euclidean (scaled)"}
        if self.mode_ == "sampled":
            out.update(reference_sample=int(len(self.reference_rows_)), sample_above=self.sample_above)
        return out
