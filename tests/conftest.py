"""Shared test set-up: nothing a test does may touch the user's own settings or data; what several folders
share.

The builders themselves live in the top-level ``fixtures`` package (importable because pyproject sets
``pythonpath = ["."]``); the fixtures here hand tests the ones that are costly or need pytest's machinery.
"""

from __future__ import annotations

import pytest


def pytest_configure(config) -> None:
    # numba's compiled functions (the map's, investigator/user_folders.py) go to pytest's own cache folder, not
    # the user's, and are kept from one test run to the next: they are made again from the installed packages.
    import os
    import tempfile

    cache = getattr(config, "cache", None)
    folder = cache.mkdir("investigator-user-cache") if cache is not None else tempfile.mkdtemp()
    os.environ.setdefault("INVESTIGATOR_CACHE_DIR", str(folder))


@pytest.fixture(autouse=True)
def _own_settings_dir(tmp_path, monkeypatch):
    monkeypatch.setenv("INVESTIGATOR_CONFIG_DIR", str(tmp_path / "settings"))
    monkeypatch.setenv("INVESTIGATOR_DATA_DIR", str(tmp_path / "data"))  # the demo's data and store
    # Every test scans afresh, so no test depends on what another left beside a file; the tests of the kept
    # scans (tests/pipeline/test_scan_cache.py) turn it on again.
    monkeypatch.setenv("INVESTIGATOR_SCAN_CACHE", "off")


@pytest.fixture
def cli(capsys):
    """Run the command line in this process (fast): ``cli(*args)`` gives (exit code, stdout, stderr)."""
    from investigator.cli.main import main

    def run(*args) -> tuple[int, str, str]:
        try:
            code = main([str(a) for a in args])
        except SystemExit as exc:  # argparse usage errors
            code = exc.code
        captured = capsys.readouterr()
        return code, captured.out, captured.err

    return run


@pytest.fixture
def csv_of(tmp_path):
    """``csv_of(kind)``: the invented table ``fixtures.tables.make_frame(kind)`` written as ``d.csv`` in the
    test's own folder; its path."""
    from fixtures.tables import make_frame

    def write(kind: str):
        path = tmp_path / "d.csv"
        make_frame(kind).to_csv(path, index=False)
        return path

    return write


@pytest.fixture(scope="session")
def demo_scan(tmp_path_factory):
    """The built-in demo file and its scan with the key column, made once for the session. Read it only:
    tests that record verdicts beside the data or change the file write their own copy of the demo."""
    import investigator
    from investigator.io.demo import DEMO_ID, write_demo

    path = write_demo(tmp_path_factory.mktemp("demo"))
    return path, investigator.scan(path, id=DEMO_ID, cache=False)  # set up before the per-test settings
