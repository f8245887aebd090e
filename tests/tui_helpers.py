"""Shared helpers of the TUI tests: the demo file, waiting on workers, and the screen as text."""

from __future__ import annotations

import asyncio
import contextlib
import functools
import io

from rich.console import Console


def run_async(test):
    """Run an async test with asyncio.run (no pytest plugin needed); fixtures pass through."""

    @functools.wraps(test)
    def wrapper(*args, **kwargs):
        return asyncio.run(test(*args, **kwargs))

    return wrapper


async def settle(app, pilot, rounds: int = 3) -> None:
    """Let every worker finish and the messages they post be handled."""
    from textual.worker import WorkerError

    for _ in range(rounds):
        await pilot.pause()
        # A worker that failed or was cancelled raises here; the tests check the app's state instead.
        with contextlib.suppress(WorkerError):
            await app.workers.wait_for_complete()
    await pilot.pause()


async def wait_until(pilot, condition, tries: int = 400) -> None:
    """Pilot pauses until ``condition()`` holds (for work started by a timer, e.g. the record debounce)."""
    for _ in range(tries):
        if condition():
            return
        await pilot.pause(0.02)
    raise AssertionError("condition not reached")


def screen_text(app) -> str:
    """What the terminal shows now, as plain text."""
    width, height = app.size
    console = Console(width=width, height=height, file=io.StringIO(), force_terminal=True, record=True,
                      legacy_windows=False, safe_box=False)
    console.print(app.screen._compositor.render_update(full=True, screen_stack=app._background_screens))
    return console.export_text()
