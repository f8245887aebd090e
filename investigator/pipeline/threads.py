"""The threads a scan's linear algebra runs on."""

from __future__ import annotations

import functools
import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import ParamSpec, TypeVar

from threadpoolctl import threadpool_limits

_lock = threading.Lock()
_inside = 0  # scans running in the context now (the TUI scans in worker threads)
_limiter: threadpool_limits | None = None
P = ParamSpec("P")
R = TypeVar("R")


@contextmanager
def one_blas_thread() -> Iterator[None]:
    """A context in which NumPy's and SciPy's BLAS run on one thread, for a whole scan.

    A scan's matrix products are thin (n x 20 by 20 x 20: distances, C-steps, covariances) or small (a peer
    group's few thousand records), and on them a second BLAS thread costs more in hand-offs than it does work.
    Measured on the 2-core development machine, with the same results to the bit: the MCD of 50,000 x 20
    records 1.1-1.4 s with two OpenBLAS threads, 0.55-0.64 s with one; of 1,000,000 x 20, 3.2 s and 2.4 s; the
    whole 50,000 x 20 scan 5.4-5.7 s and 4.7-4.9 s; a peer group of 2,330 x 22, 0.94 s and 0.51 s.
    scikit-learn's neighbour searches and the isolation scores run on threads of their own (OpenMP, Python's),
    which this leaves alone. BLAS shares a product out by its rows and columns, not along its sums, so the
    number of threads does not change a result.

    The limit is process-wide: the first scan to enter sets it and the last to leave puts the user's setting
    back, so scans that overlap in threads never leave it behind.
    """
    global _inside, _limiter
    with _lock:
        if _inside == 0:
            _limiter = threadpool_limits(limits=1, user_api="blas")
        _inside += 1
    try:
        yield
    finally:
        with _lock:
            _inside -= 1
            if _inside == 0 and _limiter is not None:
                _limiter.restore_original_limits()
                _limiter = None


def on_one_blas_thread(function: Callable[P, R]) -> Callable[P, R]:
    """``function`` run inside :func:`one_blas_thread`."""
    @functools.wraps(function)
    def run(*args: P.args, **kwargs: P.kwargs) -> R:
        with one_blas_thread():
            return function(*args, **kwargs)
    return run
