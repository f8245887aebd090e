"""local_density: the local outlier factor, defined for exact copies through k distinct neighbours."""

from __future__ import annotations

import numpy as np

from investigator.methods.base import Method
from investigator.methods.fitted import read_only


class LocalDensity(Method):
    """Local outlier factor: how much sparser a record's neighbourhood is than its neighbours'.

    Breunig, M. M., Kriegel, H.-P., Ng, R. T. & Sander, J. (2000), "LOF: identifying density-based local
    outliers", SIGMOD. With exact copies the paper's local reachability density is infinite (at least k
    records at distance 0); the paper's own remedy, beside its definition, is to base the neighbourhood on
    the *k-distinct-distance*: the distance to the k-th nearest record at a location different from the
    record's own. The neighbourhood N(p) is then every record within that distance: the record's own
    copies (distance 0) and every record at its k nearest distinct locations, each counted as often as it
    occurs. With reach(p, o) = max(k-distinct-distance(o), d(p, o)),

        lrd(p) = 1 / (mean over N(p) of reach(p, o) + 1e-10),   LOF(p) = mean over N(p) of lrd(o) / lrd(p),

    which is finite and positive for every record. On data without copies N(p) is the k nearest records
    and the score equals scikit-learn's ``LocalOutlierFactor`` (the 1e-10 guard is scikit-learn's).

    Parameters
    ----------
    k : neighbours (MinPts); 20 is scikit-learn's default and within the paper's advised 10-50.

    Fitted attributes: ``k_``, and per reference location ``k_distance_`` (its k-distinct-distance) and
    ``lrd_``.
    """

    key = "local_density"
    score_units = "local outlier factor (about 1 for a typical record)"

    def __init__(self, *, k: int = 20, cutoff: float = 0.975, contamination: float | None = None) -> None:
        super().__init__(cutoff=cutoff, contamination=contamination)
        self.k = k
        self.needs_neighbors = k

    def parameters(self) -> dict:
        return {"k": int(self.k_), "neighbourhood": "k distinct locations and the record's own copies"}

    def _lrd(self, graph, k_distance_self):
        L, d = graph.indices[:, : self.k_], graph.distances[:, : self.k_]
        w = graph.counts[L]
        reach = np.maximum(d, self.k_distance_[L])
        c = graph.copies
        total = (c * k_distance_self + (w * reach).sum(axis=1)) / (c + w.sum(axis=1))
        return 1.0 / (total + 1e-10)

    def _fit(self, X, neighbors):
        self.k_ = min(self.k, neighbors.k_)
        if self.k_ < 1:
            raise ValueError("local_density needs at least two distinct records")
        locations = neighbors.location_graph_
        self.k_distance_ = read_only(locations.distances[:, self.k_ - 1].copy())
        self.lrd_ = read_only(self._lrd(locations, self.k_distance_))
        return self.score(X, neighbors.reference_graph_)

    def score(self, X, neighbors=None):
        if neighbors is None:
            raise TypeError("local_density scores records from their neighbour graph (NeighborSearch.query)")
        kd = neighbors.distances[:, self.k_ - 1]
        lrd = self._lrd(neighbors, kd)
        L = neighbors.indices[:, : self.k_]
        w = neighbors.counts[L]
        c = neighbors.copies
        # Own copies share the record's location, hence its density: they contribute lrd(p) / lrd(p) = 1.
        return (c + (w * self.lrd_[L]).sum(axis=1) / lrd) / (c + w.sum(axis=1))
