"""Time a full scan against scikit-learn's four estimators run with default settings.

    python benchmarks/scan_speed.py [--sizes 10000,100000] [--features 20] [--no-reference]
                                    [--baseline-src DIR] [--repeat 3] [--correlation RHO] [--date-columns K]

Data: n x p standard normal records, 1% of them shifted by N(0, 4^2) per feature (planted outliers), seed 0.
The full scan is investigator.scan() on a DataFrame (preparation, neighbour search, all four methods, the
combination and the column rules). The reference is MinCovDet, LocalOutlierFactor, NearestNeighbors
(k-th neighbour distance) and IsolationForest from scikit-learn, defaults, one after another in the same
process. Prints seconds, the ratio, and ROC AUC on the planted outliers for both, the scan with
``--date-columns`` text date-time columns added (their calendar parts: the dates are parsed, and weekday,
period end and hour become features), and the time the cell
findings add (fitted once, then for the flagged records, then for all records). With ``--baseline-src``
(the folder of another checkout, e.g. ``git worktree add ../before <commit>``), the same scan is also
timed with that version's code in a fresh process, ``--repeat`` times each, and the medians are printed
side by side. Figures, not a test.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import time

import numpy as np
import pandas as pd


def make_data(n: int, p: int, seed: int = 0, rho: float = 0.0) -> tuple[pd.DataFrame, np.ndarray]:
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    if rho:  # correlated columns, correlation rho^|j - h| (the A09 structure), so that cells have predictors
        idx = np.arange(p)
        X = X @ np.linalg.cholesky(rho ** np.abs(idx[:, None] - idx[None, :])).T
    k = max(1, n // 100)
    X[:k] += rng.normal(0, 4, size=(k, p))
    labels = np.zeros(n)
    labels[:k] = 1
    return pd.DataFrame(X, columns=[f"f{j}" for j in range(p)]), labels


def with_dates(frame: pd.DataFrame, k: int, seed: int = 1) -> pd.DataFrame:
    """``frame`` with ``k`` text date-time columns: working days of 2025, 8:00 to 18:00 (invented)."""
    rng = np.random.default_rng(seed)
    days = pd.bdate_range("2025-01-02", "2025-12-30")
    out = frame.copy()
    for c in range(k):
        when = pd.to_datetime(rng.choice(days, len(frame))) + pd.to_timedelta(
            rng.integers(8 * 60, 18 * 60, len(frame)), unit="m")
        out[f"date{c}"] = when.strftime("%Y-%m-%d %H:%M")
    return out


def reference_run(X: np.ndarray) -> dict[str, tuple[float, np.ndarray]]:
    from sklearn.covariance import MinCovDet
    from sklearn.ensemble import IsolationForest
    from sklearn.neighbors import LocalOutlierFactor, NearestNeighbors

    out = {}
    t = time.perf_counter()
    out["MinCovDet"] = (0.0, MinCovDet(random_state=0).fit(X).dist_)
    out["MinCovDet"] = (time.perf_counter() - t, out["MinCovDet"][1])
    t = time.perf_counter()
    lof = LocalOutlierFactor().fit(X)
    out["LocalOutlierFactor"] = (time.perf_counter() - t, -lof.negative_outlier_factor_)
    t = time.perf_counter()
    dist, _ = NearestNeighbors().fit(X).kneighbors()
    out["NearestNeighbors"] = (time.perf_counter() - t, dist[:, -1])
    t = time.perf_counter()
    iso = IsolationForest(random_state=0).fit(X)
    out["IsolationForest"] = (time.perf_counter() - t, -iso.score_samples(X))
    return out


TIMED = """
import sys, time
sys.path.insert(0, {bench!r})
from scan_speed import make_data
import investigator
investigator.scan(make_data(500, 3)[0])
frame, _ = make_data({n}, {p})
t = time.perf_counter()
investigator.scan(frame)
print(time.perf_counter() - t)
"""


def timed_in(src: str, n: int, p: int) -> float:
    """Seconds of one full scan in a fresh process that imports investigator from ``src``."""
    code = TIMED.format(bench=os.path.dirname(os.path.abspath(__file__)), n=n, p=p)
    env = {**os.environ, "PYTHONPATH": src}
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True,
                         cwd=src)
    return float(out.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="10000,100000")
    parser.add_argument("--features", type=int, default=20)
    parser.add_argument("--no-reference", action="store_true", help="skip the scikit-learn reference run")
    parser.add_argument("--baseline-src", help="folder of another checkout to time the same scan with")
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--correlation", type=float, default=0.0,
                        help="columns correlated rho^|j-h| (0: independent, as by default)")
    parser.add_argument("--date-columns", type=int, default=0,
                        help="also time the scan with this many date-time columns added (their calendar parts)")
    args = parser.parse_args()
    if args.baseline_src:
        here = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
        for n in (int(s) for s in args.sizes.split(",")):
            now = [timed_in(here, n, args.features) for _ in range(args.repeat)]
            before = [timed_in(os.path.abspath(args.baseline_src), n, args.features) for _ in range(args.repeat)]
            a, b = statistics.median(now), statistics.median(before)
            print(f"{n:,} x {args.features}: this version {a:.2f} s, baseline {b:.2f} s (medians of "
                  f"{args.repeat}); {a / b - 1:+.1%}")
        return

    from sklearn.metrics import roc_auc_score

    import investigator
    from investigator.explain.cells import CellFinder

    investigator.scan(make_data(500, 3)[0])  # warm imports so they are not timed
    for n in (int(s) for s in args.sizes.split(",")):
        frame, labels = make_data(n, args.features, rho=args.correlation)
        t = time.perf_counter()
        result = investigator.scan(frame)
        scan_time = time.perf_counter() - t
        search = result.run.neighbors.search
        print(f"\n{n:,} x {args.features}: full scan {scan_time:.1f} s (neighbour search: {search}); "
              f"flagged {int(result.flagged.sum()):,}; consensus AUC {roc_auc_score(labels, result.consensus):.4f}")
        t = time.perf_counter()
        found = result.cells.findings()  # cell findings of the flagged records (the default scope), fit included
        flagged_cells = time.perf_counter() - t
        t = time.perf_counter()
        every = CellFinder(result).of(np.arange(result.n_records))  # all records (--cells all), fit included
        all_cells = time.perf_counter() - t
        print(f"  cell findings: flagged records {flagged_cells:.1f} s ({sum(map(len, found.values())):,} cells; "
              f"scan + cells {flagged_cells / scan_time:+.0%}), all records {all_cells:.1f} s "
              f"({sum(map(len, every)):,} cells; scan + cells {all_cells / scan_time:+.0%})")
        for k, m in result.method_results.items():
            print(f"  {k:<18} AUC {roc_auc_score(labels, m.scores):.4f}")
        if args.date_columns:
            dated = with_dates(frame, args.date_columns)
            t = time.perf_counter()
            timed = investigator.scan(dated)
            dated_time = time.perf_counter() - t
            print(f"  with {args.date_columns} date-time columns ({timed.features.n_features} features): "
                  f"{dated_time:.1f} s, {dated_time / scan_time:.2f} x the plain scan; consensus AUC "
                  f"{roc_auc_score(labels, timed.consensus):.4f}")
        if args.no_reference:
            continue
        ref = reference_run(frame.to_numpy())
        total = sum(t for t, _ in ref.values())
        for name, (secs, scores) in ref.items():
            print(f"  scikit-learn {name:<20} {secs:6.1f} s  AUC {roc_auc_score(labels, scores):.4f}")
        print(f"  scikit-learn four defaults: {total:.1f} s; full scan / defaults = {scan_time / total:.2f}")


if __name__ == "__main__":
    main()
