"""Text from the data, fit for the workspace's screen.

Textual and Rich read a plain string as markup: a column named ``price[/]`` would stop the app with a
markup error and ``[bold]x`` would be drawn bold. A :class:`rich.text.Text` is never read as markup, so
every string that can hold names, keys, values or notes is handed to a widget through :func:`plain`, which
also escapes terminal control codes (:func:`investigator.printable.printable`) so they never reach the
screen.
"""

from __future__ import annotations

from rich.text import Text

from investigator.printable import printable


def plain(value: object, limit: int | None = None) -> Text:
    """``value`` as literal text (no markup), control codes escaped, line breaks kept; ``limit``: at most
    this many characters."""
    text = printable(value, keep_newlines=True)
    return Text(text if limit is None else text[:limit])
