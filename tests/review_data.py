"""Invented supplier invoices shared by the review tests."""

from __future__ import annotations

import numpy as np
import pandas as pd

N = 12


def invoices(n: int = N, seed: int = 3) -> pd.DataFrame:
    """Invented supplier invoices: a text key, two numbers and a category."""
    rng = np.random.default_rng(seed)
    return pd.DataFrame({
        "invoice": [f"INV-{i:03d}" for i in range(n)],
        "amount": rng.gamma(3, 40, n).round(2),
        "lines": rng.integers(1, 9, n),
        "supplier": rng.choice(["north", "east", "west"], n),
    })
