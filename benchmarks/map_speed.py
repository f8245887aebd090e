"""Time the 2-D map and the group search on generated records.

    python benchmarks/map_speed.py [--sizes 10000,100000] [--features 20] [--compare]

Data (seed 0): n x p records from 8 Gaussian clusters around a 3-D latent layout, mapped linearly to p
features plus noise; 1% of the records shifted by N(0, 4^2) per feature (lone outliers) and 8
near-duplicate records placed far from every cluster (a planted group). Flags are a stand-in for the
scan's: the planted records and the 2.5% of records farthest from their 10th nearest neighbour in a
sample of 10,000 (the scan's own flags take longer to compute and are not what is timed here).

Each size runs in a fresh process, so the map time includes what a command-line run pays: importing
umap-learn and numba compiling UMAP's functions. Prints seconds for the map and for the grouping, the
map's path, the groups found and the trustworthiness (Venna & Kaski 2001; scikit-learn) of the map on
2,000 random records. ``--compare`` also fits umap-learn's own UMAP on the same sample and prints the
trustworthiness of placing the other records with its ``transform`` against our placement, with both
times (and plain UMAP on all records when n <= 30,000). Figures, not a test.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time

import numpy as np


def make_data(n: int, p: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """Records and the rows of the planted group (last 8 of the shifted block)."""
    rng = np.random.default_rng(seed)
    centres = rng.normal(0, 4, size=(8, 3))
    latent = centres[rng.integers(0, 8, n)] + rng.normal(size=(n, 3))
    X = latent @ rng.normal(size=(3, p)) + 0.5 * rng.normal(size=(n, p))
    k = max(1, n // 100)
    X[:k] += rng.normal(0, 4, size=(k, p))
    group = np.arange(k, k + 8)
    X[group] = 25 + 0.05 * rng.normal(size=(8, p))
    return X, group


def stand_in_flags(X: np.ndarray, group: np.ndarray, seed: int = 0) -> np.ndarray:
    from sklearn.neighbors import NearestNeighbors

    rng = np.random.default_rng(seed)
    sample = rng.choice(len(X), min(10_000, len(X)), replace=False)
    dist = NearestNeighbors(n_neighbors=11, algorithm="brute").fit(X[sample]).kneighbors(X)[0][:, -1]
    flagged = dist > np.quantile(dist, 0.975)
    flagged[: max(1, len(X) // 100)] = True
    flagged[group] = True
    return flagged


def one(n: int, p: int, compare: bool) -> None:
    from sklearn.manifold import trustworthiness

    from investigator.structure import embed, find_groups

    X, group = make_data(n, p)
    flagged = stand_in_flags(X, group)
    t = time.perf_counter()
    grouping = find_groups(X, flagged, seed=0)
    t_groups = time.perf_counter() - t
    t = time.perf_counter()
    result = embed(X, seed=0, keep=flagged)
    t_map = time.perf_counter() - t
    check = np.random.default_rng(1).choice(n, 2000, replace=False)
    trust = trustworthiness(X[check], result.coords[check], n_neighbors=10)
    planted = sorted({int(g) for g in grouping.group[group]})
    fitted = result.parameters.get("fitted_on", n)
    print(f"{n:>7,} x {p}: map {t_map:6.1f} s ({result.method}, fitted on {fitted:,}), trustworthiness "
          f"{trust:.3f}; grouping {t_groups:5.1f} s, {len(grouping.small_ids)} group(s) "
          f"{[grouping.size_of(g) for g in grouping.small_ids]}, {len(grouping.large_ids)} large "
          f"cluster(s), planted 8 in group {planted} of size {[grouping.size_of(g) for g in planted]}; "
          f"{int(flagged.sum()):,} flagged", flush=True)
    if compare:
        _compare(X, result, check, flagged)


def _compare(X: np.ndarray, result, check: np.ndarray, flagged: np.ndarray) -> None:
    import warnings

    import umap
    from sklearn.manifold import trustworthiness

    from investigator.structure.map import _fit_rows, _neighbors, place

    n = len(X)
    rows = _fit_rows(n, flagged, np.random.default_rng([0, 17]))
    rest = np.setdiff1d(np.arange(n), rows)
    if not len(rest):
        print("        compare: no records placed (all fitted)")
        return
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = umap.UMAP(random_state=0).fit(X[rows])
        t = time.perf_counter()
        placed_t = model.transform(X[rest])
        t_transform = time.perf_counter() - t
    t = time.perf_counter()
    d, i = _neighbors(X[rows], 15).kneighbors(X[rest])
    placed_o = place(model.embedding_, d, i)
    t_place = time.perf_counter() - t
    coords = np.empty((n, 2))
    coords[rows] = model.embedding_
    for name, placed, secs in (("transform", placed_t, t_transform), ("placement", placed_o, t_place)):
        coords[rest] = placed
        trust = trustworthiness(X[check], coords[check], n_neighbors=10)
        print(f"        umap-learn fit on the same sample, rest by {name}: {secs:.1f} s, "
              f"trustworthiness {trust:.3f}", flush=True)
    if n <= 30_000:
        t = time.perf_counter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            full = umap.UMAP(random_state=0).fit_transform(X)
        trust = trustworthiness(X[check], full[check], n_neighbors=10)
        secs = time.perf_counter() - t
        print(f"        plain UMAP on all {n:,}: {secs:.1f} s, trustworthiness {trust:.3f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="10000,100000")
    parser.add_argument("--features", type=int, default=20)
    parser.add_argument("--compare", action="store_true", help="also time umap-learn's transform")
    parser.add_argument("--one", type=int, help=argparse.SUPPRESS)  # one size, in this process
    args = parser.parse_args()
    if args.one:
        one(args.one, args.features, args.compare)
        return
    for n in (int(s) for s in args.sizes.split(",")):
        cmd = [sys.executable, __file__, "--one", str(n), "--features", str(args.features)]
        subprocess.run(cmd + (["--compare"] if args.compare else []), check=True)


if __name__ == "__main__":
    main()
