"""Text from the data made safe to show on a terminal.

A column name, key or value can hold terminal control codes: ESC sequences that clear the screen or set
the window title (ECMA-48 control functions), a carriage return or backspaces that overwrite what was
printed, C1 controls (U+0080-U+009F, some terminals read U+009B as CSI) and bidirectional overrides
(U+202E) that show text in another order than it is stored. :func:`printable` spells each such character
as its Python escape (``\\x1b``, ``\\r``, ``\\u202e``), so the user sees that it is there and the terminal
runs nothing. Printable characters, accented letters and CJK included, are kept as they are.

Used where text reaches a screen (the text renderers, the CLI's printing and error lines, the progress
bar, the workspace); the data itself and the JSON/CSV/Parquet outputs keep the real values. Only the
standard library is imported: every layer may use this module.
"""

from __future__ import annotations

import unicodedata

# Unicode general categories that are not shown as a glyph: controls (Cc: C0, DEL, C1), format characters
# (Cf: bidi overrides and isolates, zero-width characters), surrogates (Cs, from undecodable bytes),
# unassigned code points (Cn) and the line and paragraph separators (Zl, Zp). Spaces (Zs) and private-use
# characters (Co, icon fonts) are shown as they are.
HIDDEN = frozenset({"Cc", "Cf", "Cs", "Cn", "Zl", "Zp"})


def escape_char(char: str) -> str:
    """One hidden character as its Python escape: ``\\x1b``, ``\\r``, ``\\u202e``."""
    return char.encode("unicode_escape", "backslashreplace").decode("ascii")


def printable(value: object, *, keep_newlines: bool = False) -> str:
    """``str(value)`` with every hidden character escaped; ``keep_newlines`` keeps ``\\n`` (for text of
    several lines whose parts were escaped already)."""
    text = value if isinstance(value, str) else str(value)
    if text.isprintable():  # the common case: nothing to do (isprintable is False for every HIDDEN char)
        return text
    out = []
    for char in text:
        if (char == "\n" and keep_newlines) or unicodedata.category(char) not in HIDDEN:
            out.append(char)
        else:
            out.append(escape_char(char))
    return "".join(out)
