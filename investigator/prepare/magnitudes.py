"""Numbers at the edges of floating point: any finite double a file holds (up to +-1.8e308, down to the
subnormal 5e-324) must reach the methods as finite, well-conditioned input.

Two things go wrong with such values, and this module holds the cure for each:

* **Overflow in the arithmetic of the preparation.** A difference of two values above 2^1023 in magnitude
  (1.7e308 - (-1e308)) is infinite, and so is a quantile interpolated between them. Where that can happen,
  the values are first multiplied by a power of two that brings them below 2^1000 (exact: only the exponent
  changes) and the result is multiplied back (:func:`shift_of`, :func:`quantiles`, :func:`mean_sd`).
* **Overflow in the methods.** After robust scaling a value can still be 1e300 robust standard deviations
  from the median; its square is infinite, and the isolation forest works in float32 (largest 3.4e38). So a
  robust z-value beyond ``BOUND`` (10,000 robust standard deviations) is compressed logarithmically,
  z' = sign(z) B (1 + ln(|z| / B)): continuous with slope 1 at B, increasing, so a larger value stays more
  extreme and its record still ranks at the top, and at most about 1.5e7 for any finite double (the
  extremes of 1.8e308 / 5e-324). Below the bound nothing changes. 10,000 robust standard deviations is far
  beyond anything ordinary: a normal sample is 6 standard deviations out once in 500 million records, and
  even a Cauchy sample (no variance at all) lies 10,000 robust standard deviations out only once in about
  23,000 records (both from SciPy's distributions: 1 / P(|X| > x)).
"""

from __future__ import annotations

import numpy as np

BOUND = 1e4  # robust standard deviations from the median beyond which values are compressed
SAFE_EXPONENT = 1000  # values below 2^1000 in magnitude can be subtracted, and summed in thousands, safely
SQUARE_EXPONENT = 500  # values below 2^500 can be squared and summed safely
FLOAT_MAX = float(np.finfo(float).max)
_LN2 = float(np.log(2.0))


def shift_of(t: np.ndarray, below: int = SAFE_EXPONENT) -> int:
    """The power of two k >= 0 such that the finite values of ``t`` times 2^-k lie below 2^``below``."""
    t = np.asarray(t, dtype=float)
    finite = t[np.isfinite(t)]
    if not len(finite):
        return 0
    exponent = int(np.frexp(float(np.max(np.abs(finite))))[1])
    return max(0, exponent - below)


def quantiles(t: np.ndarray, q) -> np.ndarray:
    """``np.quantile(t, q)`` without overflow in the interpolation between values near the float limits."""
    t = np.asarray(t, dtype=float)
    k = shift_of(t)
    return np.ldexp(np.quantile(np.ldexp(t, -k), q), k) if k else np.quantile(t, q)


SMALL = 64  # up to this many values the median is taken from a sort (np.quantile costs 0.1 ms a call)


def median(t: np.ndarray) -> float:
    """The median, safe near the float limits (the mean of the two middle values may overflow)."""
    t = np.asarray(t, dtype=float)
    if 0 < t.size <= SMALL and t.ndim == 1 and np.isfinite(t).all() and not shift_of(t):
        # np.quantile's own arithmetic (its linear interpolation at 0.5 is b - (b - a) * 0.5 between the two
        # middle values), so the result is the same to the bit.
        s = np.sort(t)
        middle = len(s) // 2
        if len(s) % 2:
            return float(s[middle])
        a, b = float(s[middle - 1]), float(s[middle])
        return b - (b - a) * 0.5
    return float(quantiles(t, 0.5))


def mean_sd(t: np.ndarray) -> tuple[float, float]:
    """Mean and sample standard deviation (ddof 1); the standard deviation is capped at the largest float
    (the spread of values near +-1.8e308 can exceed it). Computed on values below 2^500, whose squares are
    finite."""
    t = np.asarray(t, dtype=float)
    k = shift_of(t, SQUARE_EXPONENT)
    u = np.ldexp(t, -k)
    mean, sd = float(np.mean(u)), float(np.std(u, ddof=1)) if len(u) > 1 else float("nan")
    return float(np.ldexp(mean, k)), min(float(np.ldexp(sd, k)), FLOAT_MAX)


def standardise(t: np.ndarray, center: float, scale: float, bound: float = BOUND) -> np.ndarray:
    """(t - center) / scale, compressed beyond ``bound`` as the module says; finite for every finite t."""
    t = np.asarray(t, dtype=float)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        z = (t - center) / scale
        beyond = ~(np.abs(z) <= bound) & np.isfinite(t)
        if beyond.any():
            # ln|t - c| - ln s, with the difference taken in halves so that it cannot overflow.
            half = t[beyond] / 2 - center / 2
            log_z = np.log(np.abs(half)) + _LN2 - np.log(scale)
            z = z.copy()
            z[beyond] = np.sign(half) * bound * (1 + log_z - np.log(bound))
    return z


def unstandardise(z: np.ndarray, center: float, scale: float, bound: float = BOUND) -> np.ndarray:
    """The inverse of :func:`standardise`: scaled units back to the column's (transformed) units, kept
    within the finite floats."""
    z = np.asarray(z, dtype=float)
    with np.errstate(over="ignore", invalid="ignore"):
        linear = np.where(np.abs(z) <= bound, z, np.sign(z) * bound * np.exp(np.abs(z) / bound - 1))
        t = 2 * (center / 2 + linear * (scale / 2))
    return np.clip(np.where(np.isnan(t), center, t), -FLOAT_MAX, FLOAT_MAX)


__all__ = ["BOUND", "FLOAT_MAX", "mean_sd", "median", "quantiles", "shift_of", "standardise", "unstandardise"]
