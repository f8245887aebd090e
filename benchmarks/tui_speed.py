"""How fast the investigation workspace responds (prints figures; no test asserts a time).

    python benchmarks/tui_speed.py              # all three figures
    python benchmarks/tui_speed.py --rows 20000 # a smaller table for the key-press figure

1. launch to the first drawn screen (a fresh interpreter, the Columns screen of the demo, headless);
2. launch to the Cases screen of the demo (load and scan included);
3. key press to redraw while moving through Cases on a generated table (default 100k rows), less the
   pilot's own cost per key, measured on a trivial app. Targets: <= 1 s, <= 6 s, <= 50 ms.
4. the priority relearned after a verdict on the same size of table with 20 verdicts in the store
   (docs/learning.md): the relearn alone (store read, match, model, likeness, review order), and in the
   app from the verdict's enter to the new order, with the key presses handled meanwhile (the relearn runs
   in a worker, so keys go on).
"""

from __future__ import annotations

import argparse
import asyncio
import subprocess
import sys
import tempfile
import time
from pathlib import Path

KEYS = 200


def child(mode: str, data: str, out: str) -> None:
    """Runs in a fresh interpreter: start the app and write the wall time when the screen is drawn."""
    from investigator.tui.app import InvestigatorApp

    class Timed(InvestigatorApp):
        def on_mount(self) -> None:
            super().on_mount()
            if mode == "first":
                self.call_after_refresh(self.done)
            else:
                self.watch(self, "cases", lambda c: c is not None and self.call_after_refresh(self.done), init=False)

        def done(self) -> None:
            Path(out).write_text(repr(time.time()))
            self.exit()

    # The options as a dict, as `investigator open` passes them: validated in the load worker.
    Timed(data, {"id": "claim_id"}, autoscan=mode == "cases").run(headless=True, size=(120, 40))


def launch(mode: str, data: Path) -> float:
    with tempfile.NamedTemporaryFile(suffix=".txt", delete=False) as f:
        out = f.name
    start = time.time()
    subprocess.run([sys.executable, __file__, "--child", mode, str(data), out], check=True)
    return float(Path(out).read_text()) - start


async def per_key_app(rows: int) -> tuple[float, float]:
    """Seconds per 'down' in Cases on ``rows`` records, and the time of one table redraw alone."""
    import numpy as np
    import pandas as pd

    from investigator.tui.app import InvestigatorApp
    from investigator.tui.widgets.cases_table import CasesTable

    rng = np.random.default_rng(3)
    frame = pd.DataFrame(rng.normal(size=(rows, 6)), columns=[f"x{i}" for i in range(6)])
    folder = Path(tempfile.mkdtemp(prefix="tui-speed-"))
    frame.to_csv(folder / "generated.csv", index=False)
    app = InvestigatorApp(folder / "generated.csv", {}, autoscan=True)
    async with app.run_test(size=(120, 40)) as pilot:
        t = time.perf_counter()
        while app.cases is None:
            await pilot.pause(0.2)
        await pilot.pause()
        print(f"  (scan of {rows:,} rows in the app: {time.perf_counter() - t:.1f} s)")
        table = app.screen.query_one(CasesTable)
        t = time.perf_counter()
        for _ in range(KEYS):
            await pilot.press("down")
            await pilot.pause()
        per_key = (time.perf_counter() - t) / KEYS
        assert table.cursor == KEYS
        t = time.perf_counter()
        for _ in range(50):
            table.render()
        return per_key, (time.perf_counter() - t) / 50


async def per_key_trivial() -> float:
    from textual.app import App
    from textual.widget import Widget

    class Box(Widget, can_focus=True):
        BINDINGS = [("down", "move", "")]
        n = 0

        def action_move(self) -> None:
            self.n += 1
            self.refresh()

        def render(self) -> str:
            return str(self.n)

    class Trivial(App):
        def compose(self):
            yield Box()

    app = Trivial()
    async with app.run_test(size=(120, 40)) as pilot:
        app.query_one(Box).focus()
        t = time.perf_counter()
        for _ in range(KEYS):
            await pilot.press("down")
            await pilot.pause()
        return (time.perf_counter() - t) / KEYS


async def relearn_figures(rows: int) -> tuple[float, float, float, float, int]:
    """(seconds of one relearn alone, seconds from a verdict to the new order in the app, the longest gap in
    ms of a 10 ms timer of the UI while a relearn ran, its usual gap, the ticks meanwhile) on ``rows``
    records with 20 verdicts in the store."""
    import numpy as np
    import pandas as pd

    from investigator.io.tables import load_table
    from investigator.review.matching import content_key
    from investigator.review.store import default_store_path
    from investigator.review.verdicts import record_verdict
    from investigator.tui import jobs
    from investigator.tui.app import InvestigatorApp

    rng = np.random.default_rng(4)
    frame = pd.DataFrame(rng.normal(size=(rows, 6)), columns=[f"x{i}" for i in range(6)])
    frame.insert(0, "id", [f"R{i:07d}" for i in range(rows)])
    folder = Path(tempfile.mkdtemp(prefix="tui-relearn-"))
    path = folder / "generated.csv"
    frame.to_csv(path, index=False)
    table = load_table(path, id_column="id")
    content = content_key(table)
    for n, position in enumerate(rng.choice(rows, 20, replace=False).tolist()):
        record_verdict(table, position, "benign" if n % 2 else "confirmed", None, default_store_path(path),
                       content=content)
    app = InvestigatorApp(path, {"id": "id"}, autoscan=True)
    async with app.run_test(size=(120, 40)) as pilot:
        while app.cases is None:
            await pilot.pause(0.2)
        await pilot.pause()
        result, store = app.result, app.store_path()
        alone = []
        for _ in range(3):
            t = time.perf_counter()
            jobs.relearn(result, store, 0)
            alone.append(time.perf_counter() - t)
        t = time.perf_counter()
        await pilot.press("v", "b", "enter")
        while (app.result.run.learning or {}).get("verdicts") != 21:
            await pilot.pause(0.01)
        total = time.perf_counter() - t
        # The UI loop while a relearn runs: a timer ticks every 10 ms; its longest gap is the longest the
        # workspace could not react to a key (the worker holds Python's lock in stretches).
        ticks: list[float] = []
        timer = app.set_interval(0.01, lambda: ticks.append(time.perf_counter()))
        await pilot.pause(0.1)
        before = app.result.learning
        app.relearn()
        started = time.perf_counter()
        while app.result.learning is before:
            await pilot.pause(0.01)
        during = [t for t in ticks if t >= started]
        gaps = np.diff([started, *during]) if during else np.array([time.perf_counter() - started])
        timer.stop()
        quiet = np.diff(ticks[:10]) if len(ticks) > 10 else np.array([0.0])
    return min(alone), total, 1000 * float(gaps.max()), 1000 * float(np.median(quiet)), len(during)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--rows", type=int, default=100_000, help="records for the key-press figure")
    parser.add_argument("--child", nargs=3, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        child(*args.child)
        return
    from investigator.io.demo import write_demo

    demo = write_demo(Path(tempfile.mkdtemp(prefix="tui-speed-demo-")))
    first = min(launch("first", demo) for _ in range(3))
    print(f"launch to first drawn screen:        {first:6.2f} s   (target <= 1 s; best of 3)")
    cases = launch("cases", demo)
    print(f"launch to Cases screen on the demo:  {cases:6.2f} s   (target <= 6 s)")
    app_key, render = asyncio.run(per_key_app(args.rows))
    trivial = asyncio.run(per_key_trivial())
    print(f"key press to redraw in Cases, {args.rows:,} rows: {1000 * (app_key - trivial):6.1f} ms "
          f"(target <= 50 ms; {1000 * app_key:.1f} ms per key less {1000 * trivial:.1f} ms pilot cost; "
          f"one table redraw {1000 * render:.2f} ms)")
    alone, total, longest, usual, ticks = asyncio.run(relearn_figures(args.rows))
    print(f"relearn the priority, {args.rows:,} rows, 21 verdicts: {alone:6.2f} s alone (best of 3); "
          f"{total:.2f} s from the verdict's enter to the new order in the app (save, then relearn in a worker); "
          f"while it ran the UI loop ticked {ticks} times, longest gap {longest:.0f} ms (usual {usual:.0f} ms)")


if __name__ == "__main__":
    main()
