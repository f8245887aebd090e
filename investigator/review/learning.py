"""A priority learned from the reviewer's verdicts, beside the unsupervised consensus (docs/learning.md).

The approach is the one of Das, Wong, Dietterich, Fern & Emmott (2016), "Incorporating Expert Feedback into
Active Anomaly Discovery", ICDM (cited from memory): the unsupervised detector's scores stay the starting
point, and the reviewer's labels adjust a small weight vector over the detector's own evidence, regularised
towards "no change", so that a handful of labels can only nudge the order. Ours, concretely:

    logit(priority_i) = logit(consensus_i) + x_i . w

``x_i`` is the evidence the scan already has for record i (each method's standardised score, column hits,
cell findings, calendar parts, group membership: built by the pipeline, every entry bounded), and the
consensus enters as a fixed offset. ``w`` minimises the penalised loss of the verdicts,

    sum_j  weight_j * softplus(k (1 - 2 y_j) t_j) / k  +  (lam / 2) |w|^2,     t_j = o_j + x_j w,

with y = 1 for "matters" (confirmed, follow-up) and 0 for "does not" (benign): the logistic loss at k = 1,
and with ``SHARPNESS`` k = 8 a smooth form of the hinge of Das et al., so that a verdict the order already
agrees with pulls hardly at all (docs/learning.md says what k = 1 and 4 cost on the demo). Solved by Newton's
method (the loss is strictly convex, so the solution is unique). With no verdicts w = 0 and the priority is the
consensus itself, so the order is exactly the consensus order.

**The bound.** At the optimum the gradient vanishes: ``w = (1/lam) sum_j a_j weight_j x_j`` with
``a_j = y_j - p_j`` in (-1, 1). So the model's shift of record i's log-odds is a sum of one term per
verdict, ``a_j weight_j (x_j . x_i) / lam``, and each term is at most ``R^2 / lam`` in size, R being the
largest norm of any record's evidence (the weights of one verdict's records sum to 1: a verdict on several
identical records counts once). The penalty is set to ``lam = max(MIN_PENALTY, R^2 / MODEL_BOUND)``, so one
verdict moves no record's log-odds by more than ``MODEL_BOUND`` through the model; the likeness to benign
records (:mod:`investigator.review.likeness`) adds at most ``LIKENESS_STEP`` per benign verdict. Together
``VERDICT_BOUND = 1.0`` log-odds per verdict, and since the logistic function's slope is at most 1/4, at most
0.25 of priority.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

MATTERS = ("confirmed", "follow-up")  # y = 1
DOES_NOT = ("benign",)                # y = 0; "open" is no label
MODEL_BOUND = 0.75     # the most one verdict moves any record's log-odds through the model
LIKENESS_STEP = 0.25   # the most one benign verdict lowers a record like it (review/likeness.py)
VERDICT_BOUND = MODEL_BOUND + LIKENESS_STEP  # 1.0 log-odds per verdict in all
PRIORITY_BOUND = VERDICT_BOUND / 4           # the logistic slope is at most 1/4: 0.25 of priority
MIN_PENALTY = 1.0
SHARPNESS = 8.0  # of the loss: a smooth form of the hinge of Das et al. (fit_penalised_logistic)
EDGE = 1e-12  # consensus is in (0, 1); clipped here only so that logit stays finite in floating point


def label_of(verdict: str | None) -> float | None:
    """1 for a verdict that says the record matters, 0 for benign, None for open or no verdict."""
    if verdict in MATTERS:
        return 1.0
    if verdict in DOES_NOT:
        return 0.0
    return None


def logit(p: np.ndarray) -> np.ndarray:
    p = np.clip(np.asarray(p, dtype=float), EDGE, 1 - EDGE)
    return np.log(p) - np.log1p(-p)


def sigmoid(t: np.ndarray) -> np.ndarray:
    t = np.asarray(t, dtype=float)
    out = np.empty_like(t)
    pos = t >= 0
    out[pos] = 1.0 / (1.0 + np.exp(-t[pos]))
    e = np.exp(t[~pos])
    out[~pos] = e / (1.0 + e)
    return out


def fit_penalised_logistic(X: np.ndarray, y: np.ndarray, penalty: float, *, offset: np.ndarray | None = None,
                           weight: np.ndarray | None = None, sharpness: float = 1.0, tol: float = 1e-10,
                           max_iter: int = 100) -> tuple[np.ndarray, np.ndarray, int]:
    """Minimise ``sum weight * loss(y, offset + X w) + penalty / 2 |w|^2`` by Newton's method with a
    backtracking line search, where ``loss = softplus(sharpness * (1 - 2y) * t) / sharpness``: the logistic
    loss at sharpness 1, closer to the hinge of Das et al. at higher sharpness (a verdict the order already
    agrees with then pulls hardly at all). Every verdict's slope stays within (-1, 1), which the bound rests
    on. Returns ``w``, the Hessian at ``w`` and the iterations taken. No intercept of its own: give a column of
    ones (penalised like the rest)."""
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    n, d = X.shape
    o = np.zeros(n) if offset is None else np.asarray(offset, dtype=float)
    s = np.ones(n) if weight is None else np.asarray(weight, dtype=float)
    sign = 1.0 - 2.0 * y  # +1 for "does not matter", -1 for "matters"
    k = float(sharpness)
    w = np.zeros(d)

    def loss(w: np.ndarray) -> float:
        t = o + X @ w
        return float(np.sum(s * np.logaddexp(0.0, k * sign * t)) / k + 0.5 * penalty * w @ w)

    def slopes(w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        q = sigmoid(k * sign * (o + X @ w))
        return sign * q, k * q * (1 - q)  # d loss / d t, d2 loss / d t2

    current = loss(w)
    for iteration in range(1, max_iter + 1):
        g, h = slopes(w)
        grad = X.T @ (s * g) + penalty * w
        hessian = (X * (s * h)[:, None]).T @ X + penalty * np.eye(d)
        step = np.linalg.solve(hessian, grad)
        decrement = float(grad @ step)  # the Newton decrement squared: twice the predicted decrease
        if decrement / 2 <= tol:
            return w, hessian, iteration
        size = 1.0
        trial, value = w, current
        while size > 1e-12:  # Armijo backtracking: the loss is convex, so a small enough step descends
            trial = w - size * step
            value = loss(trial)
            if value <= current - 0.25 * size * decrement:
                break
            size /= 2
        w, current = trial, value
    _, h = slopes(w)
    return w, (X * (s * h)[:, None]).T @ X + penalty * np.eye(d), max_iter


@dataclass(frozen=True)
class PriorityModel:
    """The fitted model: ``weights`` per evidence name, the ``penalty`` and what set it, how many verdicts
    (and records) it learned from, and the Hessian (for the review order's uncertainty)."""

    names: tuple[str, ...]
    weights: np.ndarray
    penalty: float
    evidence_norm: float  # R: the largest norm of any record's evidence
    verdicts: int         # cases (a verdict on identical records counts once)
    matters: int
    benign: int
    records: int          # records labelled by those verdicts
    iterations: int
    hessian: np.ndarray

    def shift(self, X: np.ndarray) -> np.ndarray:
        """The model's change of each record's log-odds, ``X w``."""
        return np.asarray(X, dtype=float) @ self.weights

    def leverage(self, X: np.ndarray) -> np.ndarray:
        """sqrt(x^T H^-1 x) per record: how uncertain the model is about its shift there (Laplace
        approximation of the posterior of w)."""
        solved = np.linalg.solve(self.hessian, np.asarray(X, dtype=float).T)
        return np.sqrt(np.maximum(np.einsum("ij,ji->i", X, solved), 0.0))

    def describe(self) -> dict:
        return {
            "model": "penalised logistic regression with the consensus as offset (Das et al. 2016)",
            "verdicts": self.verdicts, "matters": self.matters, "benign": self.benign,
            "records": self.records, "penalty": round(float(self.penalty), 6),
            "evidence_norm": round(float(self.evidence_norm), 6), "iterations": self.iterations,
            "bound_log_odds_per_verdict": VERDICT_BOUND, "bound_priority_per_verdict": PRIORITY_BOUND,
            "weights": {n: round(float(w), 6) for n, w in zip(self.names, self.weights, strict=True)},
        }


def penalty_for(evidence_norm: float) -> float:
    """The L2 penalty that keeps one verdict's term below ``MODEL_BOUND`` log-odds (module docstring)."""
    return max(MIN_PENALTY, evidence_norm**2 / MODEL_BOUND)


def fit_priority(X: np.ndarray, names: tuple[str, ...], consensus: np.ndarray, labels: np.ndarray,
                 weight: np.ndarray) -> PriorityModel:
    """Fit the model on the labelled records. ``labels``: per record 1, 0 or NaN (no label); ``weight``: per
    record the share of its verdict (1 / the records the verdict applies to), 0 where unlabelled."""
    X = np.asarray(X, dtype=float)
    if X.shape[1] != len(names):
        raise ValueError("one name per evidence column")
    if not np.isfinite(X).all():
        raise ValueError("evidence must be finite")
    labelled = np.flatnonzero(np.isfinite(labels))
    norm = float(np.sqrt((X**2).sum(axis=1)).max()) if len(X) else 0.0
    penalty = penalty_for(norm)
    y = labels[labelled]
    s = weight[labelled]
    w, hessian, iterations = fit_penalised_logistic(X[labelled], y, penalty, offset=logit(consensus[labelled]),
                                                    weight=s, sharpness=SHARPNESS)
    cases = float(s.sum())
    return PriorityModel(names, w, penalty, norm, int(round(cases)), int(round(float(s[y == 1].sum()))),
                         int(round(float(s[y == 0].sum()))), len(labelled), iterations, hessian)


def priority_of(consensus: np.ndarray, shift: np.ndarray) -> np.ndarray:
    """sigmoid(logit(consensus) + shift); where the shift is exactly 0 the consensus itself (no rounding)."""
    consensus = np.asarray(consensus, dtype=float)
    out = sigmoid(logit(consensus) + shift)
    return np.where(shift == 0, consensus, out)
