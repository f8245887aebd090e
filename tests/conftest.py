"""Shared test set-up: nothing a test does may touch the user's own settings."""

import pytest


@pytest.fixture(autouse=True)
def _own_settings_dir(tmp_path, monkeypatch):
    monkeypatch.setenv("INVESTIGATOR_CONFIG_DIR", str(tmp_path / "settings"))
