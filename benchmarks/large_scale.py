"""Time, peak memory and accuracy of the default (sampled) path against --exact, for 10k / 100k / 1M rows.

    python benchmarks/large_scale.py [--sizes 10000,100000,1000000] [--features 20] [--exact-up-to 100000]
                                     [--map auto|none] [--shift 1.0]

Data: n x p standard normal records, 1% shifted by N(0, shift^2) per feature (planted outliers), seed 0,
written to a Parquet file first. The default shift of 1 leaves the planted records overlapping the others
(AUC below 1), so that a loss of accuracy from sampling would show. Each run is a separate process that
loads the file and does the whole job: scan (preparation, neighbours, the four methods, combination, column
rules, groups, and the 2-D map unless --map none), explanations of every flagged record, and the
one-row-per-record Parquet output. Its peak memory is that process's maximum resident set size. Accuracy is
the consensus ROC AUC on the planted outliers (scikit-learn). The exact path runs only up to --exact-up-to
rows (beyond that its all-pairs neighbour search takes far longer than the sampled scan). Figures, not a test.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
from pathlib import Path

CHILD = """
import json, resource, sys, time
import numpy as np
from sklearn.metrics import roc_auc_score
from investigator.pipeline.engine import run_scan
from investigator.pipeline.options import ScanOptions
from investigator.io.tables import load_table
path, out, exact, map_method, n_planted = sys.argv[1], sys.argv[2], sys.argv[3] == "1", sys.argv[4], int(sys.argv[5])
t = time.perf_counter()
table = load_table(path)
result = run_scan(table, ScanOptions(exact=exact, map=map_method))
scanned = time.perf_counter() - t
explained = len(result.explainer.flagged())
result.write(out)
total = time.perf_counter() - t
labels = np.zeros(result.n_records)
labels[:n_planted] = 1
used = [a.part for a in result.run.approximations if a.used]
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1e6  # kilobytes on Linux
print(json.dumps({"seconds": total, "scan_seconds": scanned, "peak_gb": peak,
                  "auc": roc_auc_score(labels, result.consensus), "flagged": int(result.flagged.sum()),
                  "explained": explained, "search": result.run.neighbors.search, "approximations": used}))
"""


def make_file(n: int, p: int, folder: Path, shift: float) -> tuple[Path, int]:
    import numpy as np
    import pandas as pd

    rng = np.random.default_rng(0)
    X = rng.normal(size=(n, p))
    k = max(1, n // 100)
    X[:k] += rng.normal(0, shift, size=(k, p))
    path = folder / f"planted_{n}.parquet"
    pd.DataFrame(X, columns=[f"f{j}" for j in range(p)]).to_parquet(path, index=False)
    return path, k


def run(path: Path, n_planted: int, exact: bool, map_method: str, folder: Path) -> dict:
    out = folder / f"result_{path.stem}_{int(exact)}.parquet"
    proc = subprocess.run([sys.executable, "-c", CHILD, str(path), str(out), "1" if exact else "0", map_method,
                           str(n_planted)], capture_output=True, text=True, check=True)
    return json.loads(proc.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="10000,100000,1000000")
    parser.add_argument("--features", type=int, default=20)
    parser.add_argument("--exact-up-to", type=int, default=100_000)
    parser.add_argument("--map", default="auto", choices=("auto", "none"))
    parser.add_argument("--shift", type=float, default=1.0, help="spread of the planted shift per feature")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="investigator-bench-") as tmp:
        folder = Path(tmp)
        print(f"{'rows':>10} {'path':<8} {'seconds':>8} {'scan s':>7} {'peak GB':>8} {'AUC':>7} {'flagged':>8}  "
              "sampled parts")
        for n in (int(s) for s in args.sizes.split(",")):
            path, k = make_file(n, args.features, folder, args.shift)
            paths = [False] + ([True] if n <= args.exact_up_to else [])
            aucs = {}
            for exact in paths:
                r = run(path, k, exact, args.map, folder)
                aucs[exact] = r["auc"]
                label = "exact" if exact else "default"
                print(f"{n:>10,} {label:<8} {r['seconds']:>8.1f} {r['scan_seconds']:>7.1f} {r['peak_gb']:>8.2f} "
                      f"{r['auc']:>7.4f} {r['flagged']:>8,}  {', '.join(r['approximations']) or '-'}", flush=True)
            if True in aucs:
                print(f"{'':>10} AUC loss from sampling: {aucs[True] - aucs[False]:+.4f} (must be <= 0.01)")
            else:
                print(f"{'':>10} exact path not run above {args.exact_up_to:,} rows")


if __name__ == "__main__":
    main()
