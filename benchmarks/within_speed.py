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
features), the issue's case of two date columns and a 40-level segment column. Figures, not a test.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

import numpy as np

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


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="50000")
    parser.add_argument("--features", type=int, default=20)
    parser.add_argument("--levels", type=int, default=40)
    parser.add_argument("--repeat", type=int, default=1)
    parser.add_argument("--date-columns", type=int, default=0)
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
            t = time.perf_counter()
            investigator.scan(dated, within="segment")
            c = time.perf_counter() - t
            print(f"  --within and {args.date_columns} date-time columns {c:7.1f} s ({c / a:.2f}x the plain scan)")


if __name__ == "__main__":
    main()
