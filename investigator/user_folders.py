"""Per-user folders the program keeps things in that it can make again: the compiled functions of the map
(numba's cache) and nothing the user made. Shared by every layer (no imports from the package).

``$INVESTIGATOR_CACHE_DIR`` when set (the tests set it), else the platform's cache folder:
``$XDG_CACHE_HOME/investigator`` or ``~/.cache/investigator`` on Linux, ``~/Library/Caches/investigator`` on
macOS, ``%LOCALAPPDATA%\\investigator\\cache`` on Windows.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path


def user_cache_dir() -> Path:
    """The per-user cache folder (see the module docstring); not created here."""
    own = os.environ.get("INVESTIGATOR_CACHE_DIR")
    if own:
        return Path(own)
    if sys.platform == "win32":
        return Path(os.environ.get("LOCALAPPDATA") or Path.home() / "AppData" / "Local") / "investigator" / "cache"
    if sys.platform == "darwin":
        return Path.home() / "Library" / "Caches" / "investigator"
    return Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache") / "investigator"


def use_numba_cache() -> None:
    """Point numba's cache of compiled functions (``NUMBA_CACHE_DIR``) at ``<cache folder>/numba`` before
    umap-learn is imported, so that a second map does not compile again where the installed packages' own
    folders are not writable. A folder the user set is kept; one that cannot be created leaves numba as it is."""
    if os.environ.get("NUMBA_CACHE_DIR"):
        return
    folder = user_cache_dir() / "numba"
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError:  # a read-only home: numba then compiles in memory, as it would without this
        return
    os.environ["NUMBA_CACHE_DIR"] = str(folder)
