"""Time the commands a user waits for, side by side in one run (issue 17, points 1, 3 and 4):

    python benchmarks/command_speed.py [--rows 50000] [--features 20]

1. ``scan DATA --out x.parquet`` against the same scan with ``--out x.json`` on n x p planted data (standard
   normal records, 1% shifted by N(0, 4^2) per feature, seed 0, a Parquet file), both with ``--fresh``, and the
   ratio (each run ``--repeat`` times, alternating, the quickest shown); the ROC AUC of the consensus on the
   planted records, from each output (it must not change).
2. ``explain --key K`` on the 2,400-record demo right after a ``scan`` of it: the kept scan reused, and with
   ``--fresh`` (scanning again).
3. ``map --out m.png`` on the demo: the scan without a map, a map run after numba's cache is filled (the second
   run, ``--fresh``: the scan and UMAP again, compiled functions from the cache), and a map run that reuses
   the kept scan.

Every command runs in its own process, as a user runs it; wall time and CPU time (user + system of the
process and its children) are printed. The cache folders (the kept scans, numba's) live in a temporary
folder, so the first map run compiles. Figures, not a test.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))


def run(args: list[str], env: dict) -> tuple[float, float]:
    """Wall and CPU seconds of one command (the CPU of the child processes: this one waits for it)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    done = subprocess.run([sys.executable, "-m", "investigator", *args], env=env, capture_output=True, text=True)
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if done.returncode != 0:
        raise SystemExit(f"investigator {' '.join(args)} failed:\n{done.stderr}")
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def auc(scores: np.ndarray, labels: np.ndarray) -> float:
    from sklearn.metrics import roc_auc_score

    return float(roc_auc_score(labels, scores))


def row(what: str, wall: float, cpu: float, note: str = "") -> None:
    print(f"  {what:<58} {wall:7.2f} s wall {cpu:7.2f} s CPU  {note}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--features", type=int, default=20)
    parser.add_argument("--rows", type=int, default=50_000, help="0: leave the large scan out")
    parser.add_argument("--repeat", type=int, default=2, help="runs of each large scan (the quickest is shown)")
    args = parser.parse_args()

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        env = dict(os.environ, INVESTIGATOR_CACHE_DIR=str(folder / "user-cache"), INVESTIGATOR_SCAN_CACHE="on")
        env.pop("NUMBA_CACHE_DIR", None)
        if args.rows:
            large(args, folder, env)
        demo_rows(folder, env)
    print("\nWall times are of a shared 2-core machine; CPU times are the process's user + system seconds.")


def large(args, folder: Path, env: dict) -> None:
    from fixtures.planted import planted_outliers

    frame, labels = planted_outliers(args.rows, args.features, seed=0, share=0.01, shift=4.0)
    data = folder / "planted.parquet"
    frame.to_parquet(data, index=False)
    print(f"{args.rows:,} x {args.features} planted data")
    # Alternated and repeated, the quickest of each kept: the machine is shared, and a run that another
    # process slowed down says nothing about the writer.
    runs: dict[str, list[tuple[float, float]]] = {"parquet": [], "json": []}
    for _ in range(args.repeat):
        for fmt in runs:
            runs[fmt].append(run(["scan", str(data), "--out", str(folder / f"x.{fmt}"), "--fresh", "--quiet"], env))
    pq = (min(w for w, _ in runs["parquet"]), min(c for _, c in runs["parquet"]))
    js = (min(w for w, _ in runs["json"]), min(c for _, c in runs["json"]))
    row(f"scan --out x.parquet (quickest of {args.repeat})", *pq)
    row(f"scan --out x.json (quickest of {args.repeat})", *js,
        f"ratio {js[0] / pq[0]:.2f} wall, {js[1] / pq[1]:.2f} CPU (goal <= 1.2)")
    from_parquet = pd.read_parquet(folder / "x.parquet")["consensus_z"].to_numpy()
    records = json.loads((folder / "x.json").read_text(encoding="utf-8"))["records"]
    from_json = np.array([r["consensus_z"] for r in records], dtype=float)
    print(f"  planted-data ROC AUC of consensus_z: {auc(from_parquet, labels):.4f} (Parquet), "
          f"{auc(from_json, labels):.4f} (JSON); {(folder / 'x.json').stat().st_size / 1e6:.0f} MB of JSON")
    writers(folder)


def writers(folder: Path) -> None:
    """The writing alone, in this process on one scan of the planted data: Parquet, the JSON (its first write
    explains every flagged record, which the JSON holds and Parquet does not), and the JSON as the standard
    library wrote it before (one dict per record from record(), json.dumps)."""
    import investigator
    from investigator.io.writers import to_json_text
    from investigator.output.records import record

    result = investigator.scan(folder / "planted.parquet", cache=False)

    def timed(step) -> tuple[float, float]:
        wall, cpu = time.perf_counter(), time.process_time()
        step()
        return time.perf_counter() - wall, time.process_time() - cpu

    row("  write x.parquet (in process)", *timed(lambda: result.write(folder / "w.parquet")))
    row("  explain the flagged records (the JSON holds them)", *timed(result.explainer.flagged))
    row("  write x.json: records column-wise, orjson", *timed(lambda: result.write(folder / "w.json")))

    def standard() -> None:
        explained = result.explainer.flagged()
        document = {"run": result.run.to_dict(),
                    "records": [record(result, i, explained.get(i)) for i in range(result.n_records)]}
        if result.group_cases is not None:
            document["groups"] = [g.to_dict() for g in result.group_cases]
        (folder / "s.json").write_text(to_json_text(document), encoding="utf-8")

    row("  write x.json as before: a dict per record, json.dumps", *timed(standard))
    same = (folder / "s.json").read_bytes() == (folder / "w.json").read_bytes()
    print(f"  the two JSON files are {'byte-identical' if same else 'DIFFERENT'}")


def demo_rows(folder: Path, env: dict) -> None:
    from investigator.io.demo import DEMO_ID, write_demo

    (folder / "demo").mkdir()
    demo = write_demo(folder / "demo")
    key = pd.read_csv(demo)[DEMO_ID].iloc[2018]
    print(f"\nthe demo ({demo.name}, 2,400 records), explain --key {key}")
    scanned = run(["scan", str(demo), "--id", DEMO_ID, "--quiet"], env)
    row("scan (keeps the scan)", *scanned)
    reused = run(["explain", str(demo), "--id", DEMO_ID, "--key", key], env)
    fresh = run(["explain", str(demo), "--id", DEMO_ID, "--key", key, "--fresh"], env)
    row("explain, the kept scan reused", *reused, "(goal <= 1.0 s)")
    row("explain --fresh (scans again)", *fresh)

    print("\nthe demo, map --out m.png")
    png = str(folder / "m.png")
    first = run(["map", str(demo), "--out", png, "--fresh"], env)
    second = run(["map", str(demo), "--out", png, "--fresh"], env)
    kept = run(["map", str(demo), "--out", png], env)
    row("map, first run (numba compiles, fills its cache)", *first)
    row("map, second run --fresh (scan + UMAP, compiled from cache)", *second,
        f"{second[0] - scanned[0]:+.2f} s wall, {second[1] - scanned[1]:+.2f} s CPU beyond the scan (goal <= 4 s)")
    row("map, the kept scan with its map reused", *kept)


if __name__ == "__main__":
    main()
