"""Reusing a scan (investigator/pipeline/scan_cache.py): a kept result is the fresh scan's exactly, a changed file,
option or version is never served, a damaged cache is passed over with a warning, nothing is unpickled."""

from __future__ import annotations

import json
import shutil
import warnings
import zipfile

import numpy as np
import pytest

import investigator
from investigator.errors import InvestigatorWarning
from investigator.io.demo import DEMO_ID
from investigator.pipeline import engine, scan_cache

pytestmark = pytest.mark.slow  # several scans of the demo


@pytest.fixture(autouse=True)
def _cache_on(monkeypatch):
    monkeypatch.delenv("INVESTIGATOR_SCAN_CACHE", raising=False)  # tests/conftest.py turns it off elsewhere


@pytest.fixture
def scans(monkeypatch):
    """Counts the scans that really ran (``run_scan`` calls from ``scan()``)."""
    ran = []
    real = engine.run_scan

    def counted(*args, **kwargs):
        ran.append(1)
        return real(*args, **kwargs)

    monkeypatch.setattr(engine, "run_scan", counted)
    return ran


@pytest.fixture
def demo_copy(demo_scan, tmp_path):
    """A copy of the demo file in the test's own folder (the cache is written beside it)."""
    path = tmp_path / demo_scan[0].name
    shutil.copy(demo_scan[0], path)
    return path


def kept_files(path):
    return sorted(scan_cache.cache_folder(path).glob("scan-*.npz"))


def without_started(text: str) -> list[str]:
    return [line for line in text.splitlines() if not line.startswith('  "started"')]


def test_kept_scan_is_the_fresh_scan_exactly(demo_copy, scans, tmp_path):
    first = investigator.scan(demo_copy, id=DEMO_ID, holidays="GB-ENG", threshold="amount=500")
    assert len(scans) == 1 and len(kept_files(demo_copy)) == 1
    again = investigator.scan(demo_copy, id=DEMO_ID, holidays="GB-ENG", threshold="amount=500")
    assert len(scans) == 1  # served from the cache: no scan ran
    fresh = investigator.scan(demo_copy, id=DEMO_ID, holidays="GB-ENG", threshold="amount=500", cache=False)
    assert len(scans) == 2
    for name in fresh.method_results:
        for part in ("scores", "flags", "z", "cutoffs", "far"):
            np.testing.assert_array_equal(getattr(again.method_results[name], part),
                                          getattr(fresh.method_results[name], part), strict=True)
    for part in ("votes", "consensus", "z", "rank", "flagged", "reason"):
        np.testing.assert_array_equal(getattr(again.combination, part), getattr(fresh.combination, part))
    np.testing.assert_array_equal(again.features.values, fresh.features.values, strict=True)
    assert again.table.frame.equals(fresh.table.frame)
    assert list(again.table.frame.dtypes) == list(fresh.table.frame.dtypes)
    assert again.run.started == first.run.started  # the run record says when the scan ran
    # explanations: every flagged record's, and an unflagged one (the peers, the smallest change, the cells)
    assert {i: e.to_dict() for i, e in again.explainer.flagged().items()} == \
        {i: e.to_dict() for i, e in fresh.explainer.flagged().items()}
    ordinary = int(np.flatnonzero(~fresh.flagged)[0])
    assert again.explain(row=ordinary + 1).to_dict() == fresh.explain(row=ordinary + 1).to_dict()
    outputs = {}
    for name, result in (("again", again), ("fresh", fresh)):
        outputs[name] = (result.write(tmp_path / f"{name}.json").read_text(encoding="utf-8"),
                         (tmp_path / f"{name}.csv", result.write(tmp_path / f"{name}.csv"))[0].read_bytes())
    assert without_started(outputs["again"][0]) == without_started(outputs["fresh"][0])
    assert outputs["again"][1] == outputs["fresh"][1]
    assert again.summary() == fresh.summary()


def test_a_changed_file_option_or_version_is_never_served(demo_copy, scans, monkeypatch):
    investigator.scan(demo_copy, id=DEMO_ID)
    investigator.scan(demo_copy, id=DEMO_ID)
    assert len(scans) == 1
    investigator.scan(demo_copy, id=DEMO_ID, cutoff=0.99)  # an option
    assert len(scans) == 2
    investigator.scan(demo_copy, id=DEMO_ID, seed=1)
    assert len(scans) == 3
    lines = demo_copy.read_text(encoding="utf-8").splitlines(keepends=True)
    lines[5] = lines[5].replace(",0,", ",1,", 1)  # one cell of one record
    assert lines[5] != demo_copy.read_text(encoding="utf-8").splitlines(keepends=True)[5]
    demo_copy.write_text("".join(lines), encoding="utf-8")
    changed = investigator.scan(demo_copy, id=DEMO_ID)
    assert len(scans) == 4  # the file's content changed: scanned again
    assert changed.table.frame.shape[0] == 2400
    investigator.scan(demo_copy, id=DEMO_ID)
    assert len(scans) == 4
    monkeypatch.setattr(scan_cache, "__version__", "0.0.0-other")  # the program's version
    investigator.scan(demo_copy, id=DEMO_ID)
    assert len(scans) == 5
    # the program's source, its version unchanged (a checkout being worked on)
    monkeypatch.setattr(scan_cache, "code_digest", lambda: "0" * 64)
    investigator.scan(demo_copy, id=DEMO_ID)
    assert len(scans) == 6


def test_the_source_digest_is_the_sha256_of_the_package_files():
    # Reference: hashlib over the package's .py and .tcss files, walked here with os.walk.
    import hashlib
    import os
    from pathlib import Path

    root = Path(investigator.__file__).resolve().parent
    files = sorted(Path(folder, name) for folder, _, names in os.walk(root) for name in names
                   if name.endswith((".py", ".tcss")))
    digest = hashlib.sha256()
    for path in files:
        digest.update(path.relative_to(root).as_posix().encode("utf-8") + b"\0" + path.read_bytes())
    assert scan_cache.code_digest() == digest.hexdigest()


def test_the_whole_key_is_compared_not_only_the_digest(demo_copy, scans):
    investigator.scan(demo_copy, id=DEMO_ID)
    (kept,) = kept_files(demo_copy)
    other = scan_cache.cache_entry(demo_copy, investigator.ScanOptions(id=DEMO_ID, cutoff=0.99))
    shutil.copy(kept, other.path)  # a file under the other options' name holding this scan
    investigator.scan(demo_copy, id=DEMO_ID, cutoff=0.99)
    assert len(scans) == 2


def first_tree(state):
    """The first decision tree's entry in a kept scan's state."""
    if isinstance(state, dict):
        if "@tree" in state:
            return state
        state = list(state.values())
    if isinstance(state, list):
        for part in state:
            found = first_tree(part)
            if found is not None:
                return found
    return None


@pytest.mark.parametrize("damage", ["truncated", "garbage", "state", "tree"])
def test_a_damaged_cache_is_passed_over_with_a_warning(demo_copy, scans, damage):
    first = investigator.scan(demo_copy, id=DEMO_ID)
    (kept,) = kept_files(demo_copy)
    data = kept.read_bytes()
    if damage == "truncated":
        kept.write_bytes(data[: len(data) // 2])
    elif damage == "garbage":
        kept.write_bytes(b"not a cache" * 100)
    else:
        with np.load(kept, allow_pickle=False) as z:
            arrays = {name: z[name] for name in z.files}
        if damage == "state":  # a readable file whose state names a class no scan holds: refused, never made
            state = {"@o": "subprocess:Popen", "n": 0, "s": {}}
            arrays["state"] = np.frombuffer(json.dumps(state).encode(), np.uint8)
        else:  # a tree whose child lies outside it: the compiled tree code would read beyond its nodes
            tree = first_tree(json.loads(bytes(arrays["state"]).decode()))
            nodes = arrays[f"a{tree['state']['nodes']['@a']}"].copy()
            nodes["left_child"][0] = 10**6
            arrays[f"a{tree['state']['nodes']['@a']}"] = nodes
        with kept.open("wb") as f:
            np.savez(f, **arrays)
    with pytest.warns(InvestigatorWarning, match="could not be read.*scanning afresh"):
        again = investigator.scan(demo_copy, id=DEMO_ID)
    assert len(scans) == 2
    np.testing.assert_array_equal(again.consensus, first.consensus)
    assert zipfile.is_zipfile(kept)  # replaced by the new scan's
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        investigator.scan(demo_copy, id=DEMO_ID)
    assert len(scans) == 2  # the new scan's file is read without a warning
    assert not [w for w in caught if issubclass(w.category, InvestigatorWarning)]


def test_the_newest_scans_are_kept(csv_of, scans):
    path = csv_of("parts")
    for seed in range(scan_cache.KEEP + 2):
        investigator.scan(path, id="part_id", seed=seed)
    assert len(kept_files(path)) == scan_cache.KEEP
    investigator.scan(path, id="part_id", seed=scan_cache.KEEP + 1)  # the newest: still there
    assert len(scans) == scan_cache.KEEP + 2
    investigator.scan(path, id="part_id", seed=0)  # the oldest: gone
    assert len(scans) == scan_cache.KEEP + 3


def test_off_for_data_frames_when_turned_off_and_with_fresh(csv_of, scans, monkeypatch, cli):
    import pandas as pd

    path = csv_of("parts")
    investigator.scan(pd.read_csv(path), id="part_id")
    investigator.scan(path, id="part_id", cache=False)
    assert not scan_cache.cache_folder(path).exists()  # nothing kept for a frame, nor with cache=False
    monkeypatch.setenv("INVESTIGATOR_SCAN_CACHE", "off")
    investigator.scan(path, id="part_id")
    assert not scan_cache.cache_folder(path).exists()
    monkeypatch.delenv("INVESTIGATOR_SCAN_CACHE")
    code, out, _ = cli("explain", path, "--id", "part_id", "--key", "P-007")
    assert code == 0 and len(kept_files(path)) == 1 and len(scans) == 4
    assert cli("explain", path, "--id", "part_id", "--key", "P-007") == (0, out, "")
    assert len(scans) == 4  # reused
    assert cli("explain", path, "--id", "part_id", "--key", "P-007", "--fresh")[:2] == (0, out)
    assert len(scans) == 5  # --fresh scans again


def test_the_workspace_reuses_a_kept_scan(csv_of, scans):
    from investigator.tui import jobs

    path = csv_of("parts")
    first = investigator.scan(path, id="part_id")
    loaded = jobs.load(path, {"id": "part_id"})
    result, _, _ = jobs.run(loaded.table, loaded.options, lambda *_: None, jobs.CancelToken(), None, path)
    assert len(scans) == 1  # the kept scan of the same file and options
    np.testing.assert_array_equal(result.consensus, first.consensus)
    jobs.run(loaded.table, loaded.options, lambda *_: None, jobs.CancelToken(), None, path, cache="refresh")
    assert len(scans) == 2  # open --fresh
