"""`investigator demo` keeps its data and review store in a per-user data folder and reuses them, so verdicts
last from one run to the next; `--fresh` starts over without deleting the earlier verdicts; no temporary
folder is left anywhere. The tests' data folder is their own (INVESTIGATOR_DATA_DIR, set in conftest)."""

from __future__ import annotations

import os
import sys

import pytest

from fixtures.cli import run
from investigator.cli.demo import demo_folder
from investigator.io.demo import DEMO_FILE
from investigator.review.store import ReviewStore, default_store_path


def test_the_folder_is_the_override_else_the_users_data_folder(monkeypatch, tmp_path):
    monkeypatch.setenv("INVESTIGATOR_DATA_DIR", str(tmp_path / "own"))
    assert demo_folder() == tmp_path / "own" / "demo"
    monkeypatch.delenv("INVESTIGATOR_DATA_DIR")
    if sys.platform in ("win32", "darwin"):
        pytest.skip("the XDG folders are Linux's")
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "xdg"))
    assert demo_folder() == tmp_path / "xdg" / "investigator" / "demo"
    monkeypatch.delenv("XDG_DATA_HOME")
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    assert demo_folder() == tmp_path / "home" / ".local" / "share" / "investigator" / "demo"


@pytest.mark.slow
def test_verdicts_on_the_demo_are_kept_across_runs_and_fresh_starts_over(cli):
    folder = demo_folder()
    data = folder / DEMO_FILE
    store = default_store_path(data)
    code, out, err = cli("demo")
    assert code == 0, err
    assert f"Demo data written to {data}" in out and f"Verdicts will be kept in {store}" in out
    code, out, err = cli("verdict", data, "--id", "claim_id", "--key", "CLM-11065", "--set", "confirmed",
                         "--note", "dated Good Friday")
    assert code == 0, err
    written = data.stat().st_mtime_ns
    code, out, err = cli("demo")
    assert code == 0, err
    assert f"Demo data reused from {data}" in out and f"Verdicts kept in {store}" in out
    assert "differs" not in out
    assert data.stat().st_mtime_ns == written  # reused, not written again
    code, out, _ = cli("verdicts", data, "--id", "claim_id")
    assert "CLM-11065): confirmed" in out and "dated Good Friday" in out

    code, out, err = cli("demo", "--fresh")
    assert code == 0, err
    earlier = sorted((folder / "earlier").iterdir())
    assert len(earlier) == 1 and f"the earlier demo verdicts are kept in {earlier[0]}" in out
    assert f"Demo data written to {data}" in out
    assert not store.exists()  # a new store starts with the first verdict
    code, out, _ = cli("verdicts", data, "--id", "claim_id")
    assert "No verdicts yet" in out  # not found by content either: the earlier store is out of the folder
    with ReviewStore(earlier[0] / store.name, create=False) as old:
        assert [(e.key, e.verdict, e.note) for e in old.current()] == [("CLM-11065", "confirmed", "dated Good Friday")]


@pytest.mark.slow
def test_an_edited_demo_file_is_reused_as_it_is_with_a_note(cli, tmp_path):
    folder = tmp_path / "kept"
    code, _, err = cli("demo", "--keep", folder)
    assert code == 0, err
    data = folder / DEMO_FILE
    data.write_text(data.read_text(encoding="utf-8").replace("CLM-10001,", "CLM-90001,", 1), encoding="utf-8")
    code, out, err = cli("demo", "--keep", folder)
    assert code == 0, err
    assert "reused" in out and "differs from this version's demo" in out and "--fresh starts over" in out
    assert "CLM-90001" in data.read_text(encoding="utf-8")


@pytest.mark.slow
def test_the_demo_leaves_no_temporary_folder(tmp_path):
    tmp = tmp_path / "tmp"
    tmp.mkdir()
    env = {**os.environ, "TMPDIR": str(tmp), "TEMP": str(tmp), "TMP": str(tmp),
           "INVESTIGATOR_DATA_DIR": str(tmp_path / "data"), "INVESTIGATOR_CONFIG_DIR": str(tmp_path / "settings"),
           "MPLCONFIGDIR": str(tmp_path / "mpl"), "NUMBA_CACHE_DIR": str(tmp_path / "numba")}
    for args in (["demo"], ["demo"], ["demo", "--fresh"]):
        done = run(*args, env=env)
        assert done.returncode == 0, done.stderr
    assert list(tmp.iterdir()) == []  # nothing at all in the temporary folder
    # The data folder holds the demo file only: no verdict was set, so there is no store and nothing set aside.
    assert [p.name for p in (tmp_path / "data" / "demo").iterdir()] == [DEMO_FILE]
