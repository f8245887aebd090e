"""The priority model (investigator/review/learning.py): the Newton solver against scikit-learn and SciPy on
the same penalised problem, the consensus order with no verdicts, and the bound on what one verdict can do.

Data are random draws and scikit-learn's bundled breast cancer set (Street, Wolberg & Mangasarian 1993); no
download.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import minimize
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression

from investigator.review.learning import (
    MODEL_BOUND,
    PRIORITY_BOUND,
    VERDICT_BOUND,
    fit_penalised_logistic,
    fit_priority,
    label_of,
    logit,
    penalty_for,
    priority_of,
    sigmoid,
)


def _evidence(n: int, d: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    X = np.clip(rng.normal(0, 0.5, (n, d)), -1, 1)
    return np.column_stack([X, np.ones(n)])  # the baseline column, as the pipeline builds it


@pytest.mark.parametrize("penalty", [0.5, 3.0, 40.0])
def test_newton_matches_scikit_learn_on_the_same_penalised_problem(penalty):
    # scikit-learn's LogisticRegression minimises C * sum(logloss) + |w|^2 / 2 (its user guide, "Logistic
    # regression", L2 penalty); with C = 1 / penalty and no intercept of its own that is our problem, the
    # intercept a column of ones that is penalised too.
    b = load_breast_cancer()
    X = (b.data - b.data.mean(axis=0)) / b.data.std(axis=0)
    X = np.column_stack([X[:, :6], np.ones(len(X))])
    y = (b.target == 0).astype(float)
    ours, _, iterations = fit_penalised_logistic(X, y, penalty)
    ref = LogisticRegression(C=1 / penalty, fit_intercept=False, tol=1e-12, max_iter=10_000).fit(X, y)
    assert np.allclose(ours, ref.coef_.ravel(), atol=1e-6)
    assert iterations < 30  # Newton's method: a handful of steps on a strictly convex problem


def test_newton_matches_scikit_learn_with_sample_weights():
    rng = np.random.default_rng(3)
    X = _evidence(300, 4, 3)
    y = (rng.random(300) < sigmoid(X @ np.array([1.0, -2.0, 0.5, 0.0, -0.3]))).astype(float)
    s = rng.uniform(0.2, 1.0, 300)
    ours, _, _ = fit_penalised_logistic(X, y, 2.0, weight=s)
    ref = LogisticRegression(C=0.5, fit_intercept=False, tol=1e-12, max_iter=10_000).fit(X, y, sample_weight=s)
    assert np.allclose(ours, ref.coef_.ravel(), atol=1e-6)


@pytest.mark.parametrize("sharpness", [1.0, 8.0])
def test_the_offset_and_the_sharper_loss_match_a_general_minimiser(sharpness):
    # scikit-learn takes no offset; SciPy's BFGS minimises the same objective written out here.
    rng = np.random.default_rng(5)
    X = _evidence(80, 3, 5)
    o = rng.normal(-1, 1.5, 80)
    y = (rng.random(80) < 0.3).astype(float)
    penalty = 1.5
    ours, _, _ = fit_penalised_logistic(X, y, penalty, offset=o, sharpness=sharpness)

    def objective(w):
        t = o + X @ w
        return np.sum(np.logaddexp(0, sharpness * (1 - 2 * y) * t)) / sharpness + penalty / 2 * w @ w

    ref = minimize(objective, np.zeros(X.shape[1]), method="BFGS", options={"gtol": 1e-10}).x
    assert np.allclose(ours, ref, atol=1e-5)


def test_labels_of_the_verdicts():
    assert [label_of(v) for v in ("confirmed", "follow-up", "benign", "open", None)] == [1.0, 1.0, 0.0, None, None]


def test_no_verdicts_leaves_the_consensus_itself():
    consensus = np.array([0.9, 0.08, 0.5, 0.0800001, 0.3])
    assert np.array_equal(priority_of(consensus, np.zeros(5)), consensus)  # not sigmoid(logit(c)): c exactly


def _bound_case(seed: int, verdict: float, d: int = 6):
    X = _evidence(500, d, seed)
    rng = np.random.default_rng(seed)
    consensus = sigmoid(rng.normal(-1.5, 1.5, 500))
    labels = np.full(500, np.nan)
    weight = np.zeros(500)
    j = int(np.argmax(np.linalg.norm(X, axis=1)))  # the record with the largest evidence: the hardest case
    labels[j], weight[j] = verdict, 1.0
    consensus[j] = 0.05 if verdict else 0.95  # a verdict against the order: the one that pulls hardest
    names = tuple(f"e{k}" for k in range(X.shape[1]))
    return X, consensus, labels, weight, names


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("verdict", [0.0, 1.0])
def test_one_verdict_moves_no_record_beyond_the_bound(seed, verdict):
    X, consensus, labels, weight, names = _bound_case(seed, verdict)
    model = fit_priority(X, names, consensus, labels, weight)
    shift = model.shift(X)
    assert np.abs(shift).max() <= MODEL_BOUND + 1e-12
    priority = priority_of(consensus, shift)
    assert np.abs(priority - consensus).max() <= PRIORITY_BOUND
    assert np.abs(logit(priority) - logit(consensus)).max() <= VERDICT_BOUND
    assert np.abs(shift).max() > 0.6  # close to the bound: it is met by construction, not by learning little


def test_a_verdict_on_identical_records_counts_once():
    # 40 copies of one record under one verdict: the weights of its records sum to 1, so the bound holds.
    X, consensus, labels, weight, names = _bound_case(7, 0.0)
    j = int(np.flatnonzero(np.isfinite(labels))[0])
    X = np.vstack([X, np.repeat(X[j:j + 1], 39, axis=0)])
    consensus = np.r_[consensus, np.repeat(consensus[j], 39)]
    labels = np.r_[labels, np.zeros(39)]
    weight = np.r_[weight, np.zeros(39)]
    weight[np.flatnonzero(labels == 0)] = 1 / 40
    model = fit_priority(X, names, consensus, labels, weight)
    assert np.abs(model.shift(X)).max() <= MODEL_BOUND + 1e-12
    assert model.verdicts == 1 and model.records == 40


def test_with_many_verdicts_each_verdicts_share_of_every_shift_stays_within_the_bound():
    # At the optimum lam w = sum_j a_j s_j x_j (the module's argument): each verdict's term is bounded.
    rng = np.random.default_rng(11)
    X = _evidence(400, 5, 11)
    consensus = sigmoid(rng.normal(-1, 1.5, 400))
    labels = np.full(400, np.nan)
    chosen = rng.choice(400, 30, replace=False)
    labels[chosen] = (rng.random(30) < 0.5).astype(float)
    weight = np.where(np.isfinite(labels), 1.0, 0.0)
    model = fit_priority(X, tuple("abcdef"), consensus, labels, weight)
    t = logit(consensus[chosen]) + X[chosen] @ model.weights
    q = sigmoid(8.0 * (1 - 2 * labels[chosen]) * t)  # the loss's slope at each verdict (sharpness 8)
    a = -(1 - 2 * labels[chosen]) * q
    assert np.allclose(model.penalty * model.weights, X[chosen].T @ a, atol=1e-8)  # stationarity
    terms = np.abs(np.outer(a, np.ones(400)) * (X[chosen] @ X.T)) / model.penalty
    assert terms.max() <= MODEL_BOUND + 1e-12


def test_the_penalty_follows_the_largest_evidence():
    assert penalty_for(0.5) == 1.0  # never below MIN_PENALTY
    assert penalty_for(3.0) == pytest.approx(9.0 / MODEL_BOUND)


def test_bad_evidence_is_refused():
    X = np.array([[0.1, 1.0], [np.nan, 1.0]])
    with pytest.raises(ValueError, match="finite"):
        fit_priority(X, ("a", "baseline"), np.array([0.2, 0.3]), np.array([1.0, np.nan]), np.array([1.0, 0.0]))
