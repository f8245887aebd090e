"""Draws that depend on what the records hold, never on where they sit in the file.

A sample drawn by position (``rng.choice(n)``) picks different records when the same rows come in another
order, and a fit that walks its data in file order (random starts, trees grown on the first records of a
permutation) then gives other flags. Every random choice of a scan is made here instead, from a hash of
each record's prepared feature values:

* :func:`record_keys` gives each record a 64-bit content hash and its occurrence among exact copies
  (0 for the first copy in file order, 1 for the second, ...). Copies hold the same values, so which
  physical row is occurrence 0 changes nothing a method computes;
* :func:`uniforms` turns (hash, occurrence, salt) into a number in [0, 1) that behaves as a uniform draw
  (the SplitMix64 finaliser of Steele, Lea & Flood 2014, "Fast splittable pseudorandom number
  generators", OOPSLA), so a sample of m records is the m smallest numbers: the same records in any order;
* :func:`canonical_order` is the order of the records by their content (hash, then occurrence): fitting on
  ``X[canonical_order(X)]`` gives the same fit however the rows were shuffled.

The salt carries the scan's seed, so another ``--seed`` draws another sample.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

_MASK = np.uint64(0xFFFFFFFFFFFFFFFF)


def _mix(z: np.ndarray) -> np.ndarray:
    """SplitMix64's finaliser: a bijection of uint64 that spreads every input bit over the output."""
    z = z.astype(np.uint64, copy=True)
    with np.errstate(over="ignore"):
        z ^= z >> np.uint64(30)
        z *= np.uint64(0xBF58476D1CE4E5B9)
        z ^= z >> np.uint64(27)
        z *= np.uint64(0x94D049BB133111EB)
        z ^= z >> np.uint64(31)
    return z


def row_hashes(X: np.ndarray) -> np.ndarray:
    """A 64-bit hash of each row's values (-0.0 and 0.0 hash alike; so do all NaNs)."""
    X = np.ascontiguousarray(np.asarray(X, dtype=float) + 0.0)
    if X.ndim == 1:
        X = X[:, None]
    if X.shape[1] == 0:
        return np.zeros(len(X), dtype=np.uint64)
    return pd.util.hash_pandas_object(pd.DataFrame(X), index=False).to_numpy(dtype=np.uint64)


def record_keys(X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per record: the content hash of its row and its occurrence number among rows with that hash."""
    h = row_hashes(X)
    occurrence = pd.Series(h).groupby(h, sort=False).cumcount().to_numpy(dtype=np.uint64)
    return h, occurrence


def uniforms(X: np.ndarray, salt, keys: tuple[np.ndarray, np.ndarray] | None = None) -> np.ndarray:
    """A number in [0, 1) per record that depends only on the record's values, its occurrence among
    copies and ``salt`` (an int or a sequence of ints, e.g. ``[seed, 7]``)."""
    h, occurrence = record_keys(X) if keys is None else keys
    s = np.uint64(0x9E3779B97F4A7C15)
    for part in np.atleast_1d(np.asarray(salt, dtype=np.int64)):
        s = _mix(np.array([int(part) & 0xFFFFFFFFFFFFFFFF], dtype=np.uint64) ^ s)[0]
    with np.errstate(over="ignore"):
        z = _mix(_mix(h ^ s) + occurrence * np.uint64(0x9E3779B97F4A7C15))
    return (z >> np.uint64(11)).astype(np.float64) / float(2**53)


def sample(X: np.ndarray, size: int, salt, keys=None) -> np.ndarray:
    """Sorted positions of ``size`` records drawn without replacement by content (all when fewer)."""
    n = len(X)
    if size >= n:
        return np.arange(n)
    u = uniforms(X, salt, keys)
    return np.sort(np.argpartition(u, size - 1)[:size])


def sample_of(X: np.ndarray, candidates: np.ndarray, size: int, salt) -> np.ndarray:
    """Sorted positions (into X) of ``size`` of the ``candidates`` positions, drawn by content."""
    candidates = np.asarray(candidates)
    if size >= len(candidates):
        return np.sort(candidates)
    return np.sort(candidates[sample(X[candidates], size, salt)])


def canonical_order(X: np.ndarray, keys=None) -> np.ndarray:
    """Positions of the records ordered by content: the same sequence of values for any row order."""
    h, occurrence = record_keys(X) if keys is None else keys
    return np.lexsort((occurrence, h))


def permutation(X: np.ndarray, salt, keys=None) -> np.ndarray:
    """A random order of the records that follows their content (a shuffle that rows' order cannot move)."""
    return np.argsort(uniforms(X, salt, keys), kind="stable")
