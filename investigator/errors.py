"""Errors the user can act on.

An :class:`InputError` carries one line that names the file, column or row and says what to do. The CLI
prints it and exits with code 2; the API lets it propagate. Anything else is an internal error (exit 1).
"""


class InputError(ValueError):
    """Bad input or usage: the message is one line, names what is wrong and how to fix it."""


class InvestigatorWarning(UserWarning):
    """A degenerate but survivable setting (e.g. k reduced on tiny data)."""
