"""How sure a flag is: the share of resampled runs that flag the record.

Each run fits every method on a random subsample of 80% of the records, drawn without replacement with a
seed derived from ``--seed`` and the run number (so resampling is reproducible), with its own method seeds,
and scores all records against it, each record excluded from its own neighbours. Subsampling rather than the
bootstrap keeps a record from meeting an exact copy of itself as a neighbour (Politis & Romano 1994 on
subsampling). The preparation (roles, transforms, scaling) is the scan's own and is not refitted. A flag seen
in 20 of 20 runs is stable; one seen in 3 of 20 depends on which records happened to be there.
"""

from __future__ import annotations

import numpy as np

from ..progress import Progress, silent

SUBSAMPLE_SHARE = 0.8
STABLE = 0.9
UNSTABLE = 0.5


def flag_stability(features, options, progress: Progress = silent, X_ref: np.ndarray | None = None,
                   kinds: list | None = None) -> np.ndarray:
    """Share of resampled runs flagging each record; with ``X_ref`` (reference mode) the subsamples are drawn
    from the reference records and every record of ``features`` is scored against them."""
    from ..engine import build_methods, combine_results, fit_and_score

    X = features.values
    pool = X if X_ref is None else X_ref
    n = len(pool)
    size = max(int(round(SUBSAMPLE_SHARE * n)), min(n, X.shape[1] + 2))
    counts = np.zeros(len(X))
    for r in range(options.resamples):
        progress(f"resample {r + 1} of {options.resamples}", 0.92 + 0.07 * r / options.resamples)
        rng = np.random.default_rng([options.seed, 101, r])
        reference = np.sort(rng.choice(n, size=size, replace=False))
        seed = int(rng.integers(0, 2**31 - 1))
        methods = build_methods(options, features, [], seed=seed)
        if X_ref is None:
            results, _, _ = fit_and_score(methods, X, options, reference=reference, seed=seed)
            if kinds and "robust_distance" in results:
                _refit_kinds(results, X, reference, kinds)
        else:
            results, _, _ = fit_and_score(methods, X, options, seed=seed, X_ref=X_ref[reference])
        counts += combine_results(results, options).flagged
    return counts / options.resamples


def _refit_kinds(results, X, reference, kinds) -> None:
    """As in the scan: one MCD per kind of normal, fitted on the kind's members in this subsample."""
    from ..result import MethodResult

    rd = results["robust_distance"]
    in_run = np.zeros(len(X), dtype=bool)
    in_run[reference] = True
    members = [m[in_run[m]] for m in kinds]
    if min(len(m) for m in members) <= len(rd.method.columns_) + 1:
        return
    rd.method.fit_kinds(X, members)
    scores = rd.method.score(X)
    results["robust_distance"] = MethodResult(rd.key, rd.method, scores, rd.method.flags(scores),
                                              rd.method.unify(scores))


def stability_label(share: float) -> str:
    if share >= STABLE:
        return "stable"
    if share < UNSTABLE:
        return "unstable"
    return "borderline"
