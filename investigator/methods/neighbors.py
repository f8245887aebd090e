"""The neighbour search, computed once per scan and shared by every method that needs neighbours.

Neighbours are searched among the reference's *distinct locations*: records with exactly the same prepared
values are one location with a count. Each record gets the k nearest locations other than its own, nearest
first, and the number of other reference records at its own location (its ``copies``). Methods count copies
as neighbours at distance 0 where their definition asks for records (neighbor_distance), and use the k
distinct locations where a distance must not be 0 (local_density's k-distinct-distance, the remedy for
duplicates that Breunig, Kriegel, Ng & Sander 2000 give beside their definition of the local
reachability density). On data without copies this is the ordinary k-nearest-neighbour graph.

Locations are kept in the order of their content hash (:mod:`investigator.sampling`), so which of several
equally distant neighbours is taken never depends on the order of the rows.

Two paths, and the run record says which one ran:

* ``exact``: every location's k nearest other locations (Euclidean, in the scaled feature space), found with
  scikit-learn's ``NearestNeighbors`` (tree or brute force, chosen by scikit-learn, as its
  ``LocalOutlierFactor`` does), so local_density equals scikit-learn's LOF on data without copies.
* ``sampled``: above ``SAMPLE_ABOVE`` records, neighbours are searched among a reproducible sample of
  ``SAMPLE_SIZE`` records drawn by content (Sugiyama & Borgwardt 2013, "Rapid distance-based outlier
  detection via sampling"); a record's own location is never its neighbour, and its copies in the sample
  count as copies. The sampled search runs in float32 (distances agree with float64 to about 1e-6 relative).

A record whose own location is in the reference sees the other records there as copies: all of them in
novelty scoring (``same_table=False``), all but one when reference and records come from the same table,
whichever copy was drawn into a sample; so exact copies always get the same scores.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from investigator import sampling
from investigator.methods.fitted import read_only

SAMPLE_ABOVE = 20_000
SAMPLE_SIZE = 10_000
_CHUNK = 2048


@dataclass(frozen=True)
class NeighborGraph:
    """For each queried record: its k nearest distinct reference locations other than its own, nearest
    first (``indices`` into the search's locations, ``distances``), and ``copies``, the number of other
    reference records at its own location. ``counts`` holds the number of reference records at each
    location (the search's own array, read-only, shared by every graph it returns)."""

    indices: np.ndarray
    distances: np.ndarray
    copies: np.ndarray
    counts: np.ndarray

    @property
    def k(self) -> int:
        return self.indices.shape[1]

    def subset(self, rows: np.ndarray) -> NeighborGraph:
        return NeighborGraph(self.indices[rows], self.distances[rows], self.copies[rows], self.counts)

    def kth(self, k: int) -> tuple[np.ndarray, np.ndarray]:
        """Distance to the k-th nearest other record, copies counted as records at distance 0, and the column
        of the location it lies at (-1 where it is a copy)."""
        cum = self.copies[:, None] + np.cumsum(self.counts[self.indices], axis=1)
        col = np.argmax(cum >= k, axis=1)  # first location that brings the count to k
        reached = cum[np.arange(len(cum)), col] >= k
        col = np.where(reached, col, self.k - 1)
        is_copy = self.copies >= k
        dist = np.where(is_copy, 0.0, self.distances[np.arange(len(cum)), col])
        return dist, np.where(is_copy, -1, col)


class NeighborSearch:
    """Fit on reference records, then find neighbours of any records among them.

    Parameters
    ----------
    k : number of distinct neighbour locations to keep (the largest k any method needs).
    exact : force the exact search even for large data.
    seed : seed of the reference sample (sampled path only).

    Fitted attributes: ``mode_`` (exact or sampled), ``locations_`` (m x p distinct reference values),
    ``counts_`` (reference records at each), ``k_`` (neighbours kept: k, or fewer when there are fewer
    distinct locations), ``location_graph_`` (each location's own neighbours), ``reference_graph_`` (each
    reference record's, in the order of the records given to :meth:`fit`), ``n_reference_`` (records).
    """

    def __init__(self, k: int, *, exact: bool = False, seed: int = 0,
                 sample_above: int = SAMPLE_ABOVE, sample_size: int = SAMPLE_SIZE) -> None:
        self.k = k
        self.exact = exact
        self.seed = seed
        self.sample_above = sample_above
        self.sample_size = sample_size

    def fit(self, X: np.ndarray) -> NeighborSearch:
        """Fit on the reference records ``X``. Every fitted array is read-only: :meth:`query` and
        :meth:`locate` only read them, so one search serves any number of callers at once."""
        X = np.asarray(X, dtype=float)
        n = len(X)
        keys = sampling.record_keys(X)
        if self.exact or n <= self.sample_above:
            self.mode_ = "exact"
            chosen = np.arange(n)
        else:
            self.mode_ = "sampled"
            chosen = sampling.sample(X, min(self.sample_size, n), [self.seed, 7], keys)
        hashes = keys[0][chosen]
        # Distinct locations in the order of their hash: content, not row order, decides every tie.
        self.location_hashes_, first, inverse, counts = np.unique(hashes, return_index=True, return_inverse=True,
                                                                  return_counts=True)
        self.locations_ = X[chosen][first]
        self.counts_ = counts.astype(np.int64)
        self.n_reference_ = int(len(chosen))
        m = len(self.locations_)
        self.k_ = min(self.k, m - 1)
        # Deferred, as in isolation.py: scikit-learn's neighbours add 0.2 s to importing the methods package.
        from sklearn.neighbors import NearestNeighbors

        # The sampled path searches in float32, about twice as fast; distances are kept in float64 after.
        self.dtype_ = np.float32 if self.mode_ == "sampled" else np.float64
        self.index_ = NearestNeighbors(n_neighbors=max(self.k_, 1)).fit(self.locations_.astype(self.dtype_))
        if self.k_ > 0:
            dist, idx = self.index_.kneighbors(None, n_neighbors=self.k_)
        else:
            dist, idx = np.zeros((m, 0)), np.zeros((m, 0), dtype=np.intp)
        self.location_graph_ = NeighborGraph(_compact(idx, m), dist.astype(float), self.counts_ - 1, self.counts_)
        # The reference records themselves (the sample, on the sampled path), each at its location.
        self.reference_graph_ = self.location_graph_.subset(inverse)
        for array in (self.location_hashes_, self.locations_, self.counts_, *_arrays(self.location_graph_),
                      *_arrays(self.reference_graph_)):
            read_only(array)
        return self

    def locate(self, X: np.ndarray) -> np.ndarray:
        """Index of each record's own location among the reference locations, -1 where it has none."""
        h = sampling.row_hashes(X)
        at = np.minimum(np.searchsorted(self.location_hashes_, h), len(self.location_hashes_) - 1)
        return np.where(self.location_hashes_[at] == h, at, -1)

    def query(self, X: np.ndarray, same_table: bool = True) -> NeighborGraph:
        """Neighbours of the records ``X`` among the reference. ``same_table``: the records come from the
        table the reference was drawn from (a plain scan, a partition of it), so one record at a shared
        location is the record itself and not its copy."""
        X = np.asarray(X, dtype=float)
        n, k = len(X), self.k_
        hashes = sampling.row_hashes(X)
        # Copies among the queried records are searched once.
        _, first, inverse = np.unique(hashes, return_index=True, return_inverse=True)
        U = X[first]
        own = self.locate(U)
        idx = np.empty((len(U), k), dtype=self.location_graph_.indices.dtype)
        dist = np.empty((len(U), k))
        known = own >= 0
        idx[known] = self.location_graph_.indices[own[known]]
        dist[known] = self.location_graph_.distances[own[known]]
        new = np.flatnonzero(~known)
        for start in range(0, len(new), _CHUNK):
            rows = new[start:start + _CHUNK]
            if k:
                d, i = self.index_.kneighbors(U[rows].astype(self.dtype_), n_neighbors=k)
                idx[rows], dist[rows] = i, d
        copies = np.where(known, self.counts_[np.maximum(own, 0)] - int(same_table), 0)
        graph = NeighborGraph(idx, dist, np.maximum(copies, 0).astype(np.int64), self.counts_)
        return graph.subset(inverse) if len(U) < n or not np.array_equal(first, np.arange(n)) else graph

    def describe(self) -> dict:
        out = {"search": self.mode_, "k": int(self.k_), "metric": "euclidean (scaled)",
               "distinct_locations": int(len(self.locations_))}
        if self.mode_ == "sampled":
            out.update(reference_sample=int(self.n_reference_), sample_above=self.sample_above)
        return out


def _arrays(graph: NeighborGraph) -> tuple[np.ndarray, ...]:
    return graph.indices, graph.distances, graph.copies, graph.counts


def _compact(idx: np.ndarray, m: int) -> np.ndarray:
    # Indices point into the locations; int32 holds any reference and halves the graph's memory.
    return idx.astype(np.int32) if m < 2**31 else idx
