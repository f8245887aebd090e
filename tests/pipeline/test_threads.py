"""A scan's linear algebra on one BLAS thread (investigator/pipeline/threads.py), read back through
threadpoolctl's own report of every loaded BLAS library (threadpool_info)."""

from __future__ import annotations

import threading

import numpy as np
import pandas as pd
import pytest
from threadpoolctl import threadpool_info, threadpool_limits

import investigator
from investigator.pipeline import engine
from investigator.pipeline.threads import one_blas_thread


def _blas_threads() -> set[int]:
    return {lib["num_threads"] for lib in threadpool_info() if lib["user_api"] == "blas"}


def test_inside_blas_runs_on_one_thread_and_the_users_setting_comes_back():
    with threadpool_limits(limits=2, user_api="blas"):  # a setting of 2 to come back to
        assert _blas_threads() == {2}
        with one_blas_thread():
            assert _blas_threads() == {1}
        assert _blas_threads() == {2}


@pytest.mark.skipif(_blas_threads() <= {1}, reason="BLAS runs on one thread here already")
def test_scans_that_overlap_in_threads_keep_the_limit_until_the_last_one_leaves():
    # Two threads, ordered by events (no timing): A enters, B enters, A leaves (B still inside: still one
    # thread), B leaves (the setting of 2 is back).
    a_in, b_in, a_out, b_check, b_may_leave = (threading.Event() for _ in range(5))
    seen: dict[str, set[int]] = {}

    def a():
        with one_blas_thread():
            a_in.set()
            b_in.wait()
        a_out.set()

    def b():
        a_in.wait()
        with one_blas_thread():
            b_in.set()
            a_out.wait()
            seen["after A left"] = _blas_threads()
            b_check.set()
            b_may_leave.wait()

    before = _blas_threads()
    threads = [threading.Thread(target=a), threading.Thread(target=b)]
    for t in threads:
        t.start()
    b_check.wait()
    b_may_leave.set()
    for t in threads:
        t.join()
    assert seen["after A left"] == {1}
    assert _blas_threads() == before


@pytest.mark.skipif(_blas_threads() <= {1}, reason="BLAS runs on one thread here already")
def test_a_scan_fits_its_methods_on_one_blas_thread(monkeypatch):
    during: list[set[int]] = []
    original = engine.fit_and_score

    def recording(*args, **kwargs):
        during.append(_blas_threads())
        return original(*args, **kwargs)

    monkeypatch.setattr(engine, "fit_and_score", recording)
    rng = np.random.default_rng(3)
    frame = pd.DataFrame({"rating": rng.integers(1, 6, 300), "amount": np.round(rng.lognormal(3, 1, 300), 2)})
    before = _blas_threads()
    investigator.scan(frame, log="none")
    assert during == [{1}]
    assert _blas_threads() == before
