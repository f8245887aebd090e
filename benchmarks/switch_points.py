"""Where the sampled paths should start: the scan's AUC and CPU time with other switch points.

    python benchmarks/switch_points.py [--sizes 30000,50000,100000] [--features 20]

For each size, two invented data sets with 1% planted outliers and their labels: ``planted``
(benchmarks/scan_speed.py: standard normal records, the planted ones moved by N(0, 4^2) per feature) and
``hard`` (correlated features, correlation 0.6^|j - h|, the planted ones moved by 2.5 in 3 features chosen at
random each). Each is scanned with the switch points of today and with others: the raw MCD searched on a sample
(``mcd ABOVE/SIZE``: above ABOVE records, on SIZE of them) and the neighbour search's reference sample (``nn
SIZE``). Prints the ROC AUC of the consensus and of each method against the planted labels, and the CPU time of
the scan. The switch points of methods/mcd.py and methods/neighbors.py were chosen from its output (figures
quoted there and in docs/large.md). Figures, not a test.
"""

from __future__ import annotations

import argparse
import inspect
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent))
from scan_speed import make_data  # noqa: E402  (the benchmark's own data, shared)


def make_hard(n: int, p: int, seed: int = 0, rho: float = 0.6) -> tuple[pd.DataFrame, np.ndarray]:
    rng = np.random.default_rng([seed, 7])
    idx = np.arange(p)
    X = rng.normal(size=(n, p)) @ np.linalg.cholesky(rho ** np.abs(idx[:, None] - idx[None, :])).T
    labels = np.zeros(n, dtype=int)
    for i in rng.choice(n, n // 100, replace=False):
        labels[i] = 1
        X[i, rng.choice(p, 3, replace=False)] += rng.choice([-2.5, 2.5], 3)
    return pd.DataFrame(X, columns=[f"f{j}" for j in range(p)]), labels


def set_switches(mcd_above: int, mcd_size: int, nn_above: int, nn_size: int) -> None:
    """The switch points every part of the scan reads (the FastMCD and NeighborSearch defaults included)."""
    from investigator.methods import mcd, neighbors, robust_distance
    from investigator.pipeline import scoring

    names = list(inspect.signature(mcd.FastMCD.__init__).parameters)[1:]
    defaults = list(mcd.FastMCD.__init__.__defaults__)
    defaults[names.index("sample_above")], defaults[names.index("sample_size")] = mcd_above, mcd_size
    mcd.FastMCD.__init__.__defaults__ = tuple(defaults)
    robust_distance.SAMPLE_ABOVE = scoring.MCD_SAMPLE_ABOVE = mcd_above
    neighbors.NeighborSearch.__init__.__kwdefaults__.update(sample_above=nn_above, sample_size=nn_size)


CONFIGS = {  # name: (MCD sampled above, MCD sample, neighbours sampled above, neighbour sample)
    "mcd 100k/50k (before)": (100_000, 50_000, 20_000, 10_000),
    "mcd 20k/20k (today)": (20_000, 20_000, 20_000, 10_000),
    "mcd 20k/10k": (20_000, 10_000, 20_000, 10_000),
    "mcd 20k/20k, nn 5k": (20_000, 20_000, 20_000, 5_000),
}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="30000,50000,100000")
    parser.add_argument("--features", type=int, default=20)
    args = parser.parse_args()

    from sklearn.metrics import roc_auc_score

    import investigator

    investigator.scan(make_data(500, 3)[0])  # warm the imports
    print(f"{'rows':>8} {'data':8} {'switch points':24} {'CPU s':>6} {'AUC':>7}   per method")
    for n in (int(s) for s in args.sizes.split(",")):
        for name, (frame, labels) in {"planted": make_data(n, args.features),
                                      "hard": make_hard(n, args.features)}.items():
            for config, switches in CONFIGS.items():
                set_switches(*switches)
                t = time.process_time()
                result = investigator.scan(frame)
                cpu = time.process_time() - t
                per = "  ".join(f"{k} {roc_auc_score(labels, r.scores):.4f}" for k, r in result.method_results.items())
                print(f"{n:8,} {name:8} {config:24} {cpu:6.1f} {roc_auc_score(labels, result.consensus):7.4f}   {per}",
                      flush=True)


if __name__ == "__main__":
    main()
