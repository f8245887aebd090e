"""Fitted state that scoring can only read.

A fitted object (a method, the neighbour search, an MCD fit, a kind of normal, a scan model) is shared by
every scoring that follows: by the blocks of a partitioned scan, by the threads of a worker, by the
records of one table scored again. Scoring therefore never changes it, and the arrays it holds are marked
read-only when it is fitted, so that an in-place write anywhere downstream (``a[i] = ...``, ``a += ...``,
``out=a``) fails at once instead of changing every later score.
"""

from __future__ import annotations

import numpy as np


def read_only(array: np.ndarray) -> np.ndarray:
    """``array`` itself, marked read-only (views of it taken later are read-only too)."""
    array.flags.writeable = False
    return array


def owned(values) -> np.ndarray:
    """A read-only copy of ``values``: for arrays a caller passed in, which stay the caller's to change."""
    return read_only(np.array(values))
