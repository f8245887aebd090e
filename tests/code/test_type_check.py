"""The type checker on the engine packages: ``python -m mypy`` with the ``[tool.mypy]`` settings of
pyproject.toml (the files it checks are listed there). CI runs pytest, so this puts mypy in CI."""

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_mypy_reports_no_errors_in_the_engine_packages():
    done = subprocess.run([sys.executable, "-m", "mypy"], cwd=ROOT, capture_output=True, text=True)
    assert done.returncode == 0, f"mypy reported errors:\n{done.stdout}{done.stderr}"
    assert "Success: no issues found" in done.stdout, done.stdout + done.stderr
