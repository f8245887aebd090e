"""Text from the data, fit for the workspace's screen.

Textual and Rich read a plain string as markup: a column named ``price[/]`` would stop the app with a
markup error and ``[bold]x`` would be drawn bold. A :class:`rich.text.Text` is never read as markup, so
every string that can hold names, keys, values or notes is handed to a widget through :func:`plain`, which
also escapes terminal control codes (:func:`investigator.printable.printable`) so they never reach the
screen.
"""

from __future__ import annotations

from rich.cells import cell_len, set_cell_size
from rich.text import Text

from investigator.printable import printable


def plain(value: object, limit: int | None = None) -> Text:
    """``value`` as literal text (no markup), control codes escaped, line breaks kept; ``limit``: at most
    this many characters, a longer text cut to end with an ellipsis (never cut silently)."""
    text = printable(value, keep_newlines=True)
    return Text(text if limit is None else ellipsis(text, limit))


def ellipsis(text: str, width: int) -> str:
    """``text`` in at most ``width`` cells: cut to end with "…" when longer."""
    if cell_len(text) <= width:
        return text
    return set_cell_size(text, max(0, width - 1)) + "…" if width > 0 else ""


def fit_lines(text: str, width: int, lines: int) -> list[str]:
    """``text`` wrapped at spaces into at most ``lines`` lines of ``width`` cells; when it needs more, the
    last line ends with "…", so a status line of fixed height never drops words without saying so."""
    words = printable(text).split(" ")
    out: list[str] = []
    line = ""
    for word in words:
        candidate = f"{line} {word}" if line else word
        if cell_len(candidate) <= width or not line:
            line = candidate
            continue
        out.append(line)
        line = word
    out.append(line)
    out = [ellipsis(x, width) for x in out]  # a single word longer than the line
    if len(out) > lines:
        last = out[lines - 1]
        out = out[:lines - 1] + [ellipsis(last + " " + out[lines], width) if cell_len(last) < width else
                                 ellipsis(last + "…", width)]
    return out
