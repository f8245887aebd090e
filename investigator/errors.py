"""Errors the user can act on.

An :class:`InputError` carries one line that names the file, column or row and says what to do. The CLI
prints it and exits with code 2; the API lets it propagate. Anything else is an internal error (exit 1).

The engine speaks of its parameters as the Python API spells them: ``cutoff=1.5`` where a value follows,
```cutoff``` (in backticks) where the parameter stands alone, and lists them in ``parameters``; the command
line rewrites exactly those spellings to its flags (``--cutoff 1.5``, ``--cutoff``), see
:func:`investigator.cli.options.flag_message`.
"""

from __future__ import annotations


class InputError(ValueError):
    """Bad input or usage: the message is one line, names what is wrong and how to fix it.

    ``parameters``: the API parameters the message names (``("cutoff",)``), each spelled ``name=value`` or
    ```name``` in it, so that the command line can say its flags instead.
    """

    def __init__(self, message: str, *, parameters: tuple[str, ...] = ()) -> None:
        super().__init__(message)
        self.parameters = tuple(parameters)  # in __dict__, so it survives pickling (Dask workers)


class InvestigatorWarning(UserWarning):
    """A degenerate but survivable setting (e.g. k reduced on tiny data)."""
