"""Shapley values by their definition (Shapley 1953), for checking closed forms in the tests."""

from __future__ import annotations

from itertools import combinations
from math import factorial

import numpy as np


def shapley_values(v, p: int) -> np.ndarray:
    """phi_j = sum over coalitions C without j of |C|! (p - |C| - 1)! / p! (v(C + j) - v(C))."""
    phi = np.zeros(p)
    for j in range(p):
        others = [k for k in range(p) if k != j]
        for size in range(p):
            weight = factorial(size) * factorial(p - size - 1) / factorial(p)
            for coalition in combinations(others, size):
                phi[j] += weight * (v(coalition + (j,)) - v(coalition))
    return phi
