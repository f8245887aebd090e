"""Generated data with planted outliers, for the large-data checks (ground truth known by construction)."""

from __future__ import annotations

import numpy as np
import pandas as pd


def planted_outliers(n: int, p: int, seed: int = 0, share: float = 0.01,
                     shift: float = 4.0) -> tuple[pd.DataFrame, np.ndarray]:
    """n x p standard normal records; the first ``share`` of them shifted by N(0, shift^2) per feature."""
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    k = max(1, int(n * share))
    X[:k] += rng.normal(0, shift, size=(k, p))
    labels = np.zeros(n, dtype=int)
    labels[:k] = 1
    return pd.DataFrame(X, columns=[f"f{j}" for j in range(p)]), labels
