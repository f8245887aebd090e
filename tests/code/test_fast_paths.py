"""The fast paths stay light: `investigator --help` and the workspace's first frame import neither pandas nor
SciPy nor scikit-learn (DEVELOPERS.md: 0.6 s, 1.7 s and 2.2 s of imports; the engine is imported in the
commands and the workers). An annotation-only import that pulls them in (a type from a module of the engine)
belongs under ``if TYPE_CHECKING:``."""

from __future__ import annotations

import subprocess
import sys

import pytest

HEAVY = ("pandas", "scipy", "sklearn", "matplotlib", "umap")


@pytest.mark.parametrize("module", ["investigator.cli.main", "investigator.tui.app"])
def test_the_fast_path_imports_nothing_heavy(module):
    code = (f"import sys, {module}; "
            f"print(','.join(m for m in {HEAVY!r} if m in sys.modules))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, check=True)
    assert done.stdout.strip() == "", f"{module} imports {done.stdout.strip()}"
