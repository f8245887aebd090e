"""Printing to the terminal: every line a command prints goes through :func:`echo`, which escapes the
terminal control codes that text from the data may hold (:mod:`investigator.printable`), so a file can
neither clear nor rewrite the user's screen. The renderers escape each name and value already (keeping
their columns aligned); this is the guard for everything else a command prints.
"""

from __future__ import annotations

import sys

from investigator.printable import printable


def echo(text: object, *, file=None) -> None:
    """Print ``text`` with every control character but the line breaks escaped."""
    print(printable(text, keep_newlines=True), file=file if file is not None else sys.stdout)
