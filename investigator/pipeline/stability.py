"""How sure a flag is: the share of resampled runs that flag the record.

Each run fits every method on a random subsample of 80% of the records, drawn without replacement by
content with a salt derived from ``--seed`` and the run number (so resampling is reproducible and does not
depend on the order of the rows), with its own method seeds,
and scores all records against it, each record excluded from its own neighbours. Subsampling rather than the
bootstrap keeps a record from meeting an exact copy of itself as a neighbour (Politis & Romano 1994 on
subsampling). The preparation (roles, transforms, scaling) is the scan's own and is not refitted. A flag seen
in 20 of 20 runs is stable; one seen in 3 of 20 depends on which records happened to be there.
"""

from __future__ import annotations

import numpy as np

from investigator import sampling
from investigator.pipeline.scoring import apply_kinds, build_methods, combine_results, fit_and_score, kinds_fitter
from investigator.progress import Progress, silent

SUBSAMPLE_SHARE = 0.8


def flag_stability(features, options, progress: Progress = silent, X_ref: np.ndarray | None = None,
                   kinds=None) -> np.ndarray:
    """Share of resampled runs flagging each record; with ``X_ref`` (reference mode) the subsamples are drawn
    from the reference records and every record of ``features`` is scored against them. ``kinds``: the
    scan's kinds of normal, refitted on each subsample's members and calibrated on them."""
    X = features.values
    pool = X if X_ref is None else X_ref
    n = len(pool)
    size = max(int(round(SUBSAMPLE_SHARE * n)), min(n, X.shape[1] + 2))
    counts = np.zeros(len(X))
    keys = sampling.record_keys(pool)
    for r in range(options.resamples):
        progress(f"resample {r + 1} of {options.resamples}", 0.92 + 0.07 * r / options.resamples)
        reference = sampling.sample(pool, size, [options.seed, 101, r], keys)
        seed = int(np.random.default_rng([options.seed, 101, r]).integers(0, 2**31 - 1))
        methods = build_methods(options, features, [], seed=seed)
        if X_ref is None:
            results, _, _ = fit_and_score(methods, X, options, reference=reference, seed=seed)
            if kinds is not None:
                refitted = kinds.refit(X, reference, kinds_fitter(options, seed))
                results = apply_kinds(results, refitted, X, calibrate_on=reference)
        else:
            results, _, _ = fit_and_score(methods, X, options, seed=seed, X_ref=X_ref[reference])
        counts += combine_results(results, options).flagged
    return counts / options.resamples
