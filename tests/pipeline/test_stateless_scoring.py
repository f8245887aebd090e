"""Scoring never changes a fitted object, so one fitted scan serves any number of scorers at once.

The Dask path sends one :class:`ScanModel` to every worker, and a worker may run several threads; each
scores its own partition with the same model. Here one model, fitted on the demo data (two kinds of normal,
so per-kind calibrations are used), scores blocks from several threads that all start together
(``threading.Barrier``), and the results must be identical, array for array, to scoring the same blocks
one after the other; the model's whole state (every attribute, array values, identities and read-only
flags) must be as fitted. Then the Dask path, on a worker with two threads, must write exactly what the
in-memory scan gives. The other scoring steps of the kinds of normal (refit, calibration) and the column rules
and the preparation are checked for changes the same way.
"""

from __future__ import annotations

import logging
import threading
from concurrent.futures import ThreadPoolExecutor

import distributed
import numpy as np
import pandas as pd
import pytest

from fixtures.fitted_state import changes, snapshot
from investigator.io.demo import DEMO_ID, write_demo
from investigator.io.tables import load_table
from investigator.pipeline.engine import apply_kinds, kinds_fitter, run_scan
from investigator.pipeline.options import ScanOptions
from investigator.pipeline.result import MethodResult
from investigator.pipeline.scan_model import ScanModel
from investigator.structure.kinds import calibrate_kinds

pytestmark = pytest.mark.slow  # fits the demo several times (tens of seconds)

BLOCKS = 4


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return load_table(write_demo(tmp_path_factory.mktemp("demo")), id_column=DEMO_ID)


@pytest.fixture(scope="module")
def model(demo):
    fitted = ScanModel.fit(demo, ScanOptions(id=DEMO_ID))
    assert fitted.kinds is not None and fitted.kinds.n_kinds == 2 and fitted.calibrations  # per-kind scales
    return fitted


def blocks(demo) -> list[tuple[pd.DataFrame, int]]:
    """The demo's records in ``BLOCKS`` consecutive blocks, each with the 0-based row it starts at."""
    return [(demo.frame.iloc[rows], int(rows[0])) for rows in np.array_split(np.arange(demo.n_rows), BLOCKS)]


def outputs(model: ScanModel, frame: pd.DataFrame, first_row: int) -> tuple[dict[str, np.ndarray], pd.DataFrame]:
    """Every per-record array of one scored block, and its output rows (what the Dask path writes)."""
    result = model.score(frame, first_row)
    arrays = {"consensus": result.consensus, "consensus_z": result.consensus_z, "rank": result.rank,
              "votes": result.votes, "flagged": result.flagged, "kind": result.kinds.labels}
    for key, r in result.method_results.items():
        arrays |= {f"{key} scores": r.scores, f"{key} z": r.z, f"{key} flags": r.flags, f"{key} cutoffs": r.cutoffs}
    return arrays, result.to_frame()


def at_once(model: ScanModel, jobs: list[tuple[pd.DataFrame, int]]) -> list:
    """:func:`outputs` of every job, each in its own thread, all released together by a barrier."""
    start = threading.Barrier(len(jobs))

    def run(job):
        start.wait(timeout=120)  # a guard against a lost thread only; the threads do not race on time
        return outputs(model, *job)

    with ThreadPoolExecutor(max_workers=len(jobs)) as pool:
        return list(pool.map(run, jobs))


def assert_identical(got, expected) -> None:
    (arrays, frame), (want, want_frame) = got, expected
    assert list(arrays) == list(want)
    for name, values in want.items():
        assert np.array_equal(arrays[name], values), name
    pd.testing.assert_frame_equal(frame, want_frame, check_exact=True)


def test_threads_scoring_different_blocks_at_once_get_the_serial_results(model, demo):
    jobs = blocks(demo)
    serial = [outputs(model, *job) for job in jobs]
    before = snapshot(model, "model")
    for got, expected in zip(at_once(model, jobs), serial, strict=True):
        assert_identical(got, expected)
    assert changes(before, snapshot(model, "model")) == []


def test_threads_scoring_the_same_block_at_once_get_the_serial_result(model, demo):
    job = blocks(demo)[1]
    serial = outputs(model, *job)
    before = snapshot(model, "model")
    for got in at_once(model, [job] * 4):
        assert_identical(got, serial)
    assert changes(before, snapshot(model, "model")) == []


def test_the_blocks_together_are_the_whole_table_scored_at_once(model, demo):
    # Scoring never looks at another block: the blocks' rows are the whole table's, in order.
    whole, whole_frame = outputs(model, demo.frame, 0)
    parts = [outputs(model, *job) for job in blocks(demo)]
    for name in whole:
        if name != "rank":  # a block's rank orders its own records only
            assert np.array_equal(np.concatenate([p[0][name] for p in parts]), whole[name]), name
    joined = pd.concat([p[1] for p in parts], ignore_index=True).drop(columns="rank")
    pd.testing.assert_frame_equal(joined, whole_frame.drop(columns="rank"), check_exact=True)


def test_refitting_and_calibrating_the_kinds_change_neither_the_kinds_nor_the_methods(demo):
    # A resampled run refits the kinds on a subsample and calibrates every method within them: both return
    # new objects (KindsOfNormal.refit, calibrate_kinds), and the scan's own kinds and methods stay as fitted.
    options = ScanOptions(id=DEMO_ID)
    scan = run_scan(demo, options)
    X = scan.features.values
    rows = np.arange(0, len(X), 2)
    fitted = {"kinds": scan.kinds, "methods": {k: r.method for k, r in scan.method_results.items()},
              "calibrations": {k: r.calibration for k, r in scan.method_results.items()}, "rules": scan.rules,
              "preparer": scan.preparer}
    before = snapshot(fitted, "scan")
    refitted = scan.kinds.refit(X, rows, kinds_fitter(options, seed=3))
    overall = {k: MethodResult.overall(r.method, r.scores) for k, r in scan.method_results.items()}
    calibrated = apply_kinds(overall, refitted, X, calibrate_on=rows)
    for r in scan.method_results.values():
        calibrate_kinds(r.method, r.scores, scan.kinds.labels)
        r.calibration.apply(r.method, r.scores, scan.kinds.labels)
    scan.kinds.assign(X), scan.kinds.distances(X), scan.rules.hits(scan.features), scan.preparer.transform(demo)
    assert changes(before, snapshot(fitted, "scan")) == []
    assert refitted is not scan.kinds and len(refitted.labels) == len(X)
    assert all(calibrated[k].calibration is not scan.method_results[k].calibration for k in calibrated)


def test_the_dask_path_with_two_threads_per_worker_writes_what_the_in_memory_scan_gives(demo, tmp_path):
    # The fit sample is the whole dataset here, so the model is the in-memory scan's (see scan_model.py) and
    # every partition's records must get exactly the in-memory scan's values; the worker's two threads
    # score two partitions at a time with its one copy of the model.
    from test_dask import _read, _write_parts

    import investigator
    from investigator.pipeline.dask_engine import scan_dataset

    data = _write_parts(tmp_path / "ds", demo.frame, 8)
    # In-process workers start fast; processes=False also keeps the scattered model one shared object.
    cluster = distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                       dashboard_address="127.0.0.1:0", silence_logs=logging.ERROR)
    with distributed.Client(cluster) as client:
        assert sum(client.nthreads().values()) == 2
        scan_dataset(data, out=tmp_path / "out", client=client, id=DEMO_ID)
    cluster.close()
    got = _read(tmp_path / "out")
    memory = investigator.scan(data, id=DEMO_ID).to_frame()
    assert len(got) == demo.n_rows and got["flagged"].any() and set(got.columns) < set(memory.columns)
    # The input columns hold the same values; their text is Dask's string type (missing as NA, not NaN).
    inputs = [c for c in got.columns if c in demo.frame.columns or c.startswith("input.")]
    assert inputs
    pd.testing.assert_frame_equal(got.drop(columns=inputs), memory[got.columns].drop(columns=inputs), check_exact=True)
    pd.testing.assert_frame_equal(got[inputs], memory[inputs], check_exact=True, check_dtype=False)
