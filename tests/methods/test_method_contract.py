"""What every scoring method promises, checked for each entry of ``investigator.methods.METHODS`` and for
Hotelling T-squared (the reference-mode method, which shares the interface), on the invented tables shaped
like users' data (``fixtures/messy.py``: integer ratings, exact copies, zero-inflated amounts, clusters):

* one finite float score per record, for the reference and for any block of records;
* the same seed gives identical arrays;
* scoring (``score``, ``standardise``, ``unify``, ``flags``, ``calibrate``, ``describe``) and the neighbour
  search's ``query``/``locate`` change nothing in the fitted objects, and their fitted arrays are
  read-only;
* a reference record scored again gets its reference score, except where the method says otherwise;
* the cutoff in the run record is finite;
* on data without copies, the scores equal those of an outside implementation of the same definition
  (scikit-learn, SciPy or NumPy, named beside each check).

The column rules do not share this interface (they give column hits, not scores); they are checked in
``tests/test_stateless_scoring.py``.
"""

from functools import cache

import numpy as np
import pytest
from scipy.spatial.distance import cdist
from sklearn.ensemble import IsolationForest
from sklearn.neighbors import LocalOutlierFactor

from fixtures import messy
from fixtures.fitted_state import changes, snapshot
from investigator.io.tables import load_table
from investigator.methods import METHODS
from investigator.methods.base import Method
from investigator.methods.hotelling import Hotelling
from investigator.methods.neighbors import NeighborSearch
from investigator.pipeline.engine import build_methods, numeric_columns
from investigator.pipeline.options import ScanOptions
from investigator.prepare.features import FeaturePreparer, Features
from investigator.prepare.roles import assign_roles
from investigator.sampling import canonical_order

KEYS = [*METHODS, Hotelling.key]
DATA = {f.__name__: f for f in (messy.ratings, messy.copies_and_one_outlier, messy.zero_inflated,
                                messy.gaussian_clusters)}
SKLEARN_ESTIMATORS = ("forest_", "index_")  # scikit-learn's own objects: their arrays are theirs to mark


@cache
def prepared(data: str) -> Features:
    table = load_table(DATA[data]()[0])
    return FeaturePreparer().fit(table, assign_roles(table)).transform(table)


def build(key: str, features: Features, seed: int = 0) -> Method:
    """The method as a scan configures it (robust_distance and hotelling on the numeric features)."""
    if key == Hotelling.key:
        return Hotelling(columns=numeric_columns(features))
    (method,) = build_methods(ScanOptions(methods=(key,), seed=seed), features, [])
    return method


def fit(key: str, data: str, seed: int = 0) -> tuple[Method, NeighborSearch | None, np.ndarray]:
    X = prepared(data).values
    method = build(key, prepared(data), seed)
    search = NeighborSearch(method.needs_neighbors, seed=seed).fit(X) if method.needs_neighbors else None
    return method.fit(X, search), search, X


fitted = cache(fit)  # one fit per method and table, shared by the checks that only read it


def score(method: Method, search: NeighborSearch | None, X: np.ndarray, same_table: bool = True) -> np.ndarray:
    return method.score(X, search.query(X, same_table=same_table)) if search is not None else method.score(X)


def block(n: int) -> np.ndarray:
    return np.arange(n // 3, n // 3 + 37)


pairs = pytest.mark.parametrize("key, data", [(k, d) for k in KEYS for d in DATA])


@pairs
def test_one_float_score_per_record_for_the_reference_and_any_block(key, data):
    method, search, X = fitted(key, data)
    n = len(X)
    for scores, size in ((method.reference_scores_, n), (score(method, search, X), n),
                         (score(method, search, X[block(n)]), 37)):
        assert scores.shape == (size,) and scores.dtype == np.float64


@pairs
def test_scores_and_z_values_are_finite_on_messy_data(key, data):
    method, search, X = fitted(key, data)
    scores = score(method, search, X)
    assert np.isfinite(scores).all()
    assert np.isfinite(method.standardise(scores)).all() and np.isfinite(method.unify(scores)).all()


@pairs
def test_the_same_seed_gives_identical_arrays(key, data):
    method, search, X = fitted(key, data)
    again, search_again, _ = fit(key, data)
    assert np.array_equal(again.reference_scores_, method.reference_scores_)
    assert np.array_equal(score(again, search_again, X), score(method, search, X))
    assert again.scale_ == method.scale_ and again.describe() == method.describe()
    if search is not None:
        assert np.array_equal(search_again.locations_, search.locations_)
        for name in ("indices", "distances", "copies", "counts"):
            assert np.array_equal(getattr(search_again.reference_graph_, name), getattr(search.reference_graph_, name))


@pairs
def test_scoring_changes_nothing_in_the_method_or_the_neighbour_search(key, data):
    method, search, X = fitted(key, data)
    before, search_before = snapshot(method, "method"), snapshot(search, "search")
    scores = score(method, search, X)
    part = score(method, search, X[block(len(X))], same_table=False)
    kind = method.calibrate(scores[: len(scores) // 2])  # a per-kind scale: a new object, the method's unchanged
    for scale in (None, kind):
        method.standardise(scores, scale), method.unify(part, scale), method.flags(scores, scale)
    method.describe(), method.parameters()
    if search is not None:
        search.locate(X), search.query(X[::-1], same_table=False), search.describe()
    assert changes(before, snapshot(method, "method")) == []
    assert changes(search_before, snapshot(search, "search")) == []


@pairs
def test_fitted_arrays_are_read_only(key, data):
    # An in-place write anywhere downstream then fails at once instead of changing later scores.
    method, search, _ = fitted(key, data)
    for owner, prefix in ((method, "method"), (search, "search")):
        state = snapshot(owner, prefix)
        writeable = [p for p, leaf in state.items() if leaf[0] == "array" and leaf[2]
                     and p.split(".")[1].endswith("_") and not p.split(".")[1].startswith(SKLEARN_ESTIMATORS)]
        assert writeable == []


@pairs
def test_reference_records_scored_again_get_their_reference_scores(key, data):
    # Scoring the reference's own records as records of the same table (a plain scan, a partition of it)
    # reproduces the fit's reference scores exactly, in one block or in several.
    method, search, X = fitted(key, data)
    assert np.array_equal(score(method, search, X), method.reference_scores_)
    rows = block(len(X))
    assert np.array_equal(score(method, search, X[rows]), method.reference_scores_[rows])


@pytest.mark.parametrize("key", [k for k in KEYS if METHODS.get(k) and METHODS[k]().needs_neighbors])
def test_where_scores_differ_from_reference_scores_a_record_scored_as_new_meets_its_own_copy(key):
    # Where the reference score is not the score: a record scored as new (novelty scoring, same_table=False)
    # is not excluded from its own neighbours, since the reference copy of it is another record; it then has
    # one more copy at distance 0, so its k-th neighbour distance can only fall.
    method, search, X = fitted(key, "gaussian_clusters")
    novelty = score(method, search, X, same_table=False)
    assert not np.array_equal(novelty, method.reference_scores_)
    if key == "neighbor_distance":
        assert (novelty <= method.reference_scores_).all() and (novelty < method.reference_scores_).any()


@pairs
def test_the_run_record_gives_a_finite_cutoff(key, data):
    method, _, _ = fitted(key, data)
    described = method.describe()
    assert np.isfinite(described["cutoff"]) and described["cutoff"] == method.cutoff_


def _robust_distance(method, X):
    # SciPy's Mahalanobis distance (scipy.spatial.distance.cdist, metric "mahalanobis") to the fit's
    # reweighted location, with its inverse covariance, squared.
    fit = method.mcd_
    d = cdist(X[:, method.columns_], fit.location[None, :], "mahalanobis", VI=np.linalg.inv(fit.covariance))
    return d[:, 0] ** 2


def _local_density(method, X):
    # scikit-learn's LocalOutlierFactor with the same k: its negative_outlier_factor_ is minus the LOF
    # (Breunig et al. 2000); on data without copies the k-distinct neighbourhood is the k nearest records.
    return -LocalOutlierFactor(n_neighbors=method.k).fit(X).negative_outlier_factor_


def _isolation(method, X):
    # scikit-learn's IsolationForest with the same trees, subsample and seed, fitted on the records in
    # content order as the method fits them; minus score_samples is the paper's s (Liu et al. 2008).
    forest = IsolationForest(n_estimators=method.n_trees, max_samples=method.subsample, random_state=method.seed)
    return -forest.fit(X[canonical_order(X)]).score_samples(X)


def _neighbor_distance(method, X):
    # All pairwise distances by SciPy's cdist, each record's own distance left out: the k-th smallest.
    D = cdist(X, X)
    np.fill_diagonal(D, np.inf)
    return np.sort(D, axis=1)[:, method.k - 1]


def _hotelling(method, X):
    # T2 = (x - mean)' S^-1 (x - mean) with NumPy's mean and sample covariance (ddof = 1) and a linear
    # solve (the statistic as Tracy, Young & Mason 1992 and Montgomery define it).
    Xc = X[:, method.columns_]
    D = Xc - Xc.mean(axis=0)
    return np.einsum("ij,ij->i", D, np.linalg.solve(np.cov(Xc, rowvar=False, ddof=1), D.T).T)


OUTSIDE = {"robust_distance": _robust_distance, "local_density": _local_density, "isolation": _isolation,
           "neighbor_distance": _neighbor_distance, "hotelling": _hotelling}


@pytest.mark.parametrize("key", KEYS)
def test_scores_equal_an_outside_implementation_on_data_without_copies(key):
    method, _, X = fitted(key, "gaussian_clusters")
    assert len(np.unique(X, axis=0)) == len(X)  # no copies: the definitions agree
    np.testing.assert_allclose(method.reference_scores_, OUTSIDE[key](method, X), rtol=1e-9)
