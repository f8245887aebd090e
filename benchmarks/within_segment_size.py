"""How many records a segment needs for a fit of its own (peer groups, ``within``): the figures behind the line.

    python benchmarks/within_segment_size.py [--features 3,8] [--sizes 20,30,40,50,60,80,100,200,1000] [--seeds 10]

Each table is one segment as the within view fits it: n records of p independent standard normal features,
the first max(1, n // 50) of them moved to the 0.9999 chi-square quantile of p degrees of freedom (a planted
outlier in a random direction), rounded to 3 decimals, scanned with every method (``investigator.scan``).
Printed per n and p, averaged over the seeds: the share of the other records flagged, the share of planted
records found, and the Spearman correlation (SciPy) between the consensus and the true squared Mahalanobis
distance of every record, which says how well the segment's own fit orders its records. The line in
pipeline/within.py, max(50, 10 x features), is where the order settles (about 0.9 and above). Figures, not a test.
"""

from __future__ import annotations

import argparse

import numpy as np
import pandas as pd
from scipy import stats


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--features", default="3,8")
    parser.add_argument("--sizes", default="20,30,40,50,60,80,100,200,1000")
    parser.add_argument("--seeds", type=int, default=10)
    args = parser.parse_args()

    import investigator

    print(f"{'p':>3} {'n':>6}  {'others flagged':>14}  {'planted found':>13}  {'Spearman(consensus, d2)':>23}")
    for p in (int(v) for v in args.features.split(",")):
        for n in (int(v) for v in args.sizes.split(",")):
            others, found, rho = [], [], []
            for seed in range(args.seeds):
                rng = np.random.default_rng([seed, n, p])
                X = rng.normal(size=(n, p))
                m = max(1, n // 50)
                direction = rng.normal(size=(m, p))
                direction /= np.linalg.norm(direction, axis=1, keepdims=True)
                X[:m] = direction * np.sqrt(stats.chi2.ppf(0.9999, p))
                result = investigator.scan(pd.DataFrame(X.round(3), columns=[f"c{j}" for j in range(p)]))
                others.append(result.flagged[m:].mean())
                found.append(result.flagged[:m].mean())
                rho.append(stats.spearmanr(result.consensus_z, (X**2).sum(axis=1)).statistic)
            print(f"{p:>3} {n:>6}  {np.mean(others):>14.3f}  {np.mean(found):>13.2f}  {np.mean(rho):>23.2f}",
                  flush=True)


if __name__ == "__main__":
    main()
