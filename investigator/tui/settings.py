"""What the workspace remembers between sessions: only whether the first-run hint was dismissed.

Kept in a small file under ``$INVESTIGATOR_CONFIG_DIR``, else ``$XDG_CONFIG_HOME/investigator``, else
``~/.config/investigator``. Nothing about the data or the verdicts is stored here.
"""

from __future__ import annotations

import os
from pathlib import Path

HINT_SEEN = "first-run-hint-dismissed"


def settings_dir() -> Path:
    own = os.environ.get("INVESTIGATOR_CONFIG_DIR")
    if own:
        return Path(own)
    base = os.environ.get("XDG_CONFIG_HOME") or str(Path.home() / ".config")
    return Path(base) / "investigator"


def hint_seen() -> bool:
    return (settings_dir() / HINT_SEEN).exists()


def mark_hint_seen() -> None:
    try:
        folder = settings_dir()
        folder.mkdir(parents=True, exist_ok=True)
        (folder / HINT_SEEN).write_text("the first-run hint was dismissed with 'i'\n", encoding="utf-8")
    except OSError:  # a read-only home: the hint simply shows again next time
        pass
