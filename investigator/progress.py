"""Progress reporting: the engine calls a callback; the CLI draws a bar, the TUI a widget."""

from __future__ import annotations

import sys
from collections.abc import Callable

from investigator.printable import printable

Progress = Callable[[str, float], None]


def silent(stage: str, fraction: float) -> None:  # noqa: ARG001 - the no-op callback
    return None


class StderrBar:
    """A one-line bar on stderr, drawn only when stderr is a terminal."""

    def __init__(self, stream=None, width: int = 24) -> None:
        self.stream = stream or sys.stderr
        self.width = width
        self.active = hasattr(self.stream, "isatty") and self.stream.isatty()

    def __call__(self, stage: str, fraction: float) -> None:
        if not self.active:
            return
        filled = int(round(self.width * max(0.0, min(1.0, fraction))))
        bar = "#" * filled + "-" * (self.width - filled)
        self.stream.write(f"\r[{bar}] {fraction:4.0%} {printable(stage):<28}")  # a stage may name a column
        if fraction >= 1.0:
            self.stream.write("\r" + " " * (self.width + 40) + "\r")
        self.stream.flush()
