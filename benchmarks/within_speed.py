"""Time a scan with peer groups (``within``) beside the plain scan of the same table.

    python benchmarks/within_speed.py [--sizes 50000] [--features 20] [--levels 40] [--repeat 1] [--date-columns 2]

Data: the records of benchmarks/scan_speed.py (n x p standard normal, 1% shifted by N(0, 4^2) per feature, seed 0)
with one more column, ``segment``, of ``levels`` values (S01, S02, ...) drawn with unequal shares (a Zipf-like
1 / rank weighting, as vendors and product lines are), each segment's records moved by a centre of its own
(N(0, 1) per feature). The plain scan is ``investigator.scan(frame)`` (``segment`` a category feature); the
within scan is ``investigator.scan(frame, within="segment")``: the same overall scan plus one scan per segment
above the line (pipeline/within.py) and the small segments scored against the nearest fit. Prints seconds of
each (the median of ``--repeat`` runs), the ratio, the segments fitted on their own and pooled, and the records
flagged overall, within their segment and within only. With ``--date-columns K``, also the within scan of the
table with K text date-time columns added (benchmarks/scan_speed.py ``with_dates``: their calendar parts are
features), the issue's case of two date columns and a 40-level segment column.

``--efforts 100x100,50x50,0x25`` times the within scan of the same table with other segment efforts (MCD random
starts x isolation trees of each segment's own fit, pipeline/scoring.py ``Effort``; 0 starts: DetMCD's fixed
starts alone, as a segment fits now) and prints, for each, the
AUC of the within consensus on a planted within-segment case: 1% of the records moved by 3 in 3 features chosen
at random each, so that they stand out in their own segment (spread 1) far more than in the whole table (spread
about 1.4, the segments' centres added). Figures, not a test.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent))
from scan_speed import make_data, with_dates  # noqa: E402  (the benchmark's own data, shared)


def make_segmented(n: int, p: int, levels: int, seed: int = 0):
    frame, _ = make_data(n, p, seed=seed)
    rng = np.random.default_rng([seed, 40])
    weights = 1.0 / np.arange(1, levels + 1)
    segment = rng.choice(levels, size=n, p=weights / weights.sum())
    centres = rng.normal(size=(levels, p))
    frame.iloc[:, :p] = frame.to_numpy() + centres[segment]
    frame["segment"] = [f"S{s + 1:02d}" for s in segment]
    return frame


SHIFT = 3.0  # the planted move, in the segments' own standard deviations


def make_planted_within(n: int, p: int, levels: int, seed: int = 0):
    """The segments and centres of :func:`make_segmented`, standard normal records around them, and 1% planted
    within-segment outliers (see the module's docstring); returns the table and the labels."""
    rng = np.random.default_rng([seed, 40])  # the draws of make_segmented, in its order
    weights = 1.0 / np.arange(1, levels + 1)
    segment = rng.choice(levels, size=n, p=weights / weights.sum())
    centres = rng.normal(size=(levels, p))
    rng = np.random.default_rng([seed, 41])
    values = rng.normal(size=(n, p))
    labels = np.zeros(n, dtype=int)
    for i in rng.choice(n, size=max(1, n // 100), replace=False):
        labels[i] = 1
        values[i, rng.choice(p, size=3, replace=False)] += rng.choice([-SHIFT, SHIFT], size=3)
    frame = pd.DataFrame(values + centres[segment], columns=[f"f{j}" for j in range(p)])
    frame["segment"] = [f"S{s + 1:02d}" for s in segment]
    return frame, labels


def timed(run, *args, **kwargs):
    """(wall seconds, CPU seconds of this process, result) of ``run(*args, **kwargs)``."""
    t, cpu = time.perf_counter(), time.process_time()
    out = run(*args, **kwargs)
    return time.perf_counter() - t, time.process_time() - cpu, out


def auc(labels: np.ndarray, scores: np.ndarray) -> float:
    from sklearn.metrics import roc_auc_score

    return float(roc_auc_score(labels, np.nan_to_num(scores, nan=-np.inf)))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="50000")
    parser.add_argument("--features", type=int, default=20)
    parser.add_argument("--levels", type=int, default=40)
    parser.add_argument("--repeat", type=int, default=1)
    parser.add_argument("--date-columns", type=int, default=0)
    parser.add_argument("--efforts", default="", help="e.g. 100x100,50x50: MCD starts x trees of a segment's fit")
    args = parser.parse_args()

    import investigator

    investigator.scan(make_data(500, 3)[0])  # warm the imports so they are not timed
    for n in (int(s) for s in args.sizes.split(",")):
        frame = make_segmented(n, args.features, args.levels)
        plain, within = [], []
        for _ in range(args.repeat):
            t = time.perf_counter()
            base = investigator.scan(frame)
            plain.append(time.perf_counter() - t)
            t = time.perf_counter()
            result = investigator.scan(frame, within="segment")
            within.append(time.perf_counter() - t)
        a, b = statistics.median(plain), statistics.median(within)
        w = result.within
        own = sum(1 for s in w.segments if s.scored_against is None)
        sizes = sorted((s.records for s in w.segments), reverse=True)
        print(f"\n{n:,} x {args.features} + a {args.levels}-level segment column (segments of {sizes[0]:,} down to "
              f"{sizes[-1]:,} records; line {w.min_records:,} records)")
        print(f"  plain scan      {a:7.1f} s   flagged {int(base.flagged.sum()):,}")
        print(f"  --within        {b:7.1f} s   ({b / a:.2f}x the plain scan); {own} segments fitted on their own, "
              f"{len(w.segments) - own} pooled")
        print(f"  flagged within their segment {int(w.flagged.sum()):,}; within only {int(w.within_only.sum()):,}; "
              f"overall {int(result.flagged.sum()):,}")
        if args.date_columns:
            dated = with_dates(frame, args.date_columns)
            d, dc, _ = timed(investigator.scan, dated)
            c, cc, _ = timed(investigator.scan, dated, within="segment")
            print(f"  the same table with {args.date_columns} date-time columns: plain {d:7.1f} s ({dc:.1f} s of CPU), "
                  f"--within {c:7.1f} s ({cc:.1f} s of CPU): {c / d:.2f}x its plain scan ({cc / dc:.2f}x in CPU "
                  f"time); {c / a:.2f}x the plain scan without dates")
        if args.efforts:
            from investigator.pipeline import engine, scoring

            planted, labels = make_planted_within(n, args.features, args.levels)
            print(f"  planted within-segment outliers ({int(labels.sum()):,}): AUC of the overall consensus "
                  f"{auc(labels, investigator.scan(planted).consensus):.4f}")
            kept = engine.SEGMENT
            try:
                for spec in args.efforts.split(","):
                    starts, trees = (int(v) for v in spec.split("x"))
                    engine.SEGMENT = scoring.Effort(mcd_starts=starts, forest_trees=trees)
                    e, ec, r = timed(investigator.scan, planted, within="segment")
                    print(f"    segment effort {starts} MCD starts x {trees} trees: --within {e:6.1f} s ({ec:.1f} s of "
                          f"CPU), AUC of the within consensus {auc(labels, r.within.consensus):.4f}")
            finally:
                engine.SEGMENT = kept


if __name__ == "__main__":
    main()
