"""What a scan of a million records cannot go below on this machine, beside what the scan takes (issue 17, point 5):

    python benchmarks/million_floor.py [--rows 1000000] [--features 20] [--no-command]

Data: n x p standard normal records, 1% shifted by N(0, 4^2) per feature (planted outliers), seed 0, written to
a Parquet file. Each step below is timed once in this process, on the data as the scan sees it, at the sizes the
scan's sampled paths use (docs/large.md); together they are the floor: reading the file, preparing the columns,
and one pass of each method. Then (unless ``--no-command``) ``investigator scan DATA --out x.parquet`` runs in its
own process, as a user runs it, with its wall time, CPU time, peak memory (maximum resident set size) and the
ROC AUC of its consensus on the planted records. Figures, not a test.
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd


def timed(what: str, step):
    wall, cpu = time.perf_counter(), time.process_time()
    out = step()
    print(f"  {what:<66} {time.perf_counter() - wall:6.2f} s wall {time.process_time() - cpu:6.2f} s CPU")
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--features", type=int, default=20)
    parser.add_argument("--no-command", action="store_true", help="leave out the scan command itself")
    args = parser.parse_args()
    n, p = args.rows, args.features
    rng = np.random.default_rng(0)
    X = rng.normal(size=(n, p))
    k = n // 100
    X[:k] += rng.normal(0, 4, size=(k, p))
    with tempfile.TemporaryDirectory() as tmp:
        data = Path(tmp) / "planted.parquet"
        pd.DataFrame(X, columns=[f"f{j}" for j in range(p)]).to_parquet(data, index=False)
        del X
        print(f"{n:,} x {p} planted records ({data.stat().st_size / 1e6:.0f} MB of Parquet)")
        floor(data)
        if not args.no_command:
            command(data, Path(tmp), k)


def floor(data: Path) -> None:
    from investigator.io.tables import load_table
    from investigator.methods.isolation import Isolation
    from investigator.methods.mcd import FastMCD
    from investigator.methods.neighbors import NeighborSearch
    from investigator.pipeline.threads import one_blas_thread
    from investigator.prepare.features import FeaturePreparer
    from investigator.prepare.roles import assign_roles

    print("the floor: each step once, in this process")
    timed("read the Parquet file (pandas)", lambda: pd.read_parquet(data))
    table = timed("load it as a scan does (investigator.io.tables.load_table)", lambda: load_table(data))
    columns = assign_roles(table)
    features = timed("prepare the features (fit and transform)",
                     lambda: FeaturePreparer().fit(table, columns).transform(table))
    Z = features.values
    with one_blas_thread():
        search = timed("neighbour search: fit on a 10,000 sample", lambda: NeighborSearch(20).fit(Z))
        timed("neighbour search: every record's 20 nearest in the sample", lambda: search.query(Z))
        timed("robust_distance: MCD on a 20,000 sample, reweighted on all", lambda: FastMCD().fit(Z))
        forest = Isolation()
        timed("isolation: 200 trees of 256 records, and every record's score", lambda: forest._fit(Z))


def command(data: Path, folder: Path, planted: int) -> None:
    from sklearn.metrics import roc_auc_score

    out = folder / "x.parquet"
    env = dict(os.environ, INVESTIGATOR_SCAN_CACHE="off")
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    subprocess.run([sys.executable, "-m", "investigator", "scan", str(data), "--out", str(out), "--quiet"],
                   env=env, check=True, capture_output=True)
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    z = pd.read_parquet(out, columns=["consensus_z"])["consensus_z"].to_numpy()
    labels = np.zeros(len(z))
    labels[:planted] = 1
    print(f"investigator scan DATA --out x.parquet: {wall:.1f} s wall, {cpu:.1f} s CPU, "
          f"{after.ru_maxrss / 1e6:.2f} GB peak memory, consensus ROC AUC {roc_auc_score(labels, z):.4f}")


if __name__ == "__main__":
    main()
