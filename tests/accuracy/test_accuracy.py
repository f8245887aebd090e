"""Consensus accuracy on open benchmark data built the way the ODDS collection builds it (Rayana 2016)."""

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.metrics import roc_auc_score

import investigator

pytestmark = pytest.mark.slow  # the whole module: full scans of labelled public sets

DRAW_SEED = 0  # fixed seed of the outlier draw


def odds_like(loader, ordinary, outlier_class, n_outliers, seed=DRAW_SEED):
    bunch = loader()
    rng = np.random.default_rng(seed)
    drawn = rng.choice(np.flatnonzero(bunch.target == outlier_class), n_outliers, replace=False)
    keep = np.concatenate([np.flatnonzero(np.isin(bunch.target, ordinary)), drawn])
    labels = np.r_[np.zeros(len(keep) - n_outliers), np.ones(n_outliers)]
    return pd.DataFrame(bunch.data[keep], columns=bunch.feature_names), labels


CASES = {
    # ODDS "wine": classes 2 and 3 (scikit-learn's 1 and 2) ordinary, 10 of class 1 (our 0) as outliers.
    "wine": (load_wine, [1, 2], 0, 10),
    # ODDS "wbc": benign ordinary (scikit-learn target 1), 21 malignant (target 0) as outliers.
    "breast_cancer": (load_breast_cancer, [1], 0, 21),
}


@pytest.mark.parametrize("name", CASES)
def test_consensus_auc(name):
    frame, labels = odds_like(*CASES[name])
    assert len(frame) == {"wine": 129, "breast_cancer": 378}[name]  # the ODDS set sizes
    result = investigator.scan(frame)
    consensus_auc = roc_auc_score(labels, result.consensus)
    singles = [roc_auc_score(labels, m.scores) for m in result.method_results.values()]
    assert consensus_auc >= 0.88
    assert consensus_auc >= np.mean(singles)
