"""isolation: isolation forest."""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from investigator import sampling
from investigator.methods.base import Method

# From this many records the scores are computed in row blocks on every core: the trees' descent releases
# Python's lock, and a record's score does not depend on the block it is in (1,000,000 x 22 records, 200
# trees: 10.0 s in one thread, 4.8 s in two, the same scores to the bit; measured on the 2-core machine).
PARALLEL_FROM = 50_000


class Isolation(Method):
    """Isolation forest anomaly score s = 2^(-E[h(x)] / c(psi)), in (0, 1]; higher is easier to isolate.

    Liu, F. T., Ting, K. M. & Zhou, Z.-H. (2008), "Isolation forest", ICDM. Uses scikit-learn's
    ``IsolationForest`` (its ``score_samples`` negated gives s), fitted on the records in content order
    (:func:`investigator.sampling.canonical_order`) so the trees do not depend on the order of the rows.

    Parameters
    ----------
    n_trees : number of trees (default 200).
    subsample : records per tree, psi (default 256, as in the paper).
    seed : random state of the forest.

    Fitted attributes: ``forest_`` (the scikit-learn estimator).
    """

    key = "isolation"
    score_units = "isolation forest anomaly score in (0, 1]; 0.5 is the paper's 'no clear anomaly'"

    def __init__(self, *, n_trees: int = 200, subsample: int = 256, seed: int = 0, cutoff: float = 0.975,
                 contamination: float | None = None) -> None:
        super().__init__(cutoff=cutoff, contamination=contamination)
        self.n_trees = n_trees
        self.subsample = subsample
        self.seed = seed

    def parameters(self) -> dict:
        return {"trees": self.n_trees, "subsample": int(self.forest_.max_samples_), "seed": self.seed}

    def _fit(self, X, neighbors=None):
        # Deferred: scikit-learn's ensembles add 0.3 s to importing the methods package (`python -X importtime`
        # after SciPy, on this machine), which ScanOptions imports: the TUI builds the options while loading.
        from sklearn.ensemble import IsolationForest

        # The forest draws each tree's records by position; given the records in content order it grows the
        # same trees whatever the order of the rows.
        self.forest_ = IsolationForest(
            n_estimators=self.n_trees, max_samples=min(self.subsample, len(X)), random_state=self.seed
        ).fit(X[sampling.canonical_order(X)])
        return self.score(X)

    def score(self, X, neighbors=None):
        cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count() or 1
        if cores < 2 or len(X) < PARALLEL_FROM:
            return -self.forest_.score_samples(X)
        edges = np.linspace(0, len(X), 4 * cores + 1).astype(int)  # several blocks a core: they end unevenly
        with ThreadPoolExecutor(cores) as pool:
            parts = pool.map(lambda a, b: self.forest_.score_samples(X[a:b]), edges[:-1], edges[1:])
            return -np.concatenate(list(parts))

    def _regularise(self, scores):
        return np.asarray(scores, dtype=float)  # already on a bounded, roughly symmetric scale

    def _unregularise(self, t):
        return float(t)

    def _rule_units(self) -> str:
        return "score"
