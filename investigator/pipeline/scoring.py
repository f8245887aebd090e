"""The scan's scoring steps: build the methods, fit and score them, judge records within their kind of normal,
and combine the methods' results. Used by the scan (engine.py), by resampled runs (stability.py) and by a
model scoring blocks of a dataset (scan_model.py), so those do not import one another.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from investigator.errors import InputError
from investigator.methods import METHODS, Isolation, RobustDistance
from investigator.methods.base import Method
from investigator.methods.mcd import SAMPLE_ABOVE as MCD_SAMPLE_ABOVE
from investigator.methods.mcd import FastMCD
from investigator.methods.neighbors import NeighborSearch
from investigator.pipeline.combine import combine, combined_fence, trimmed_mean
from investigator.pipeline.options import ScanOptions
from investigator.pipeline.result import MethodResult
from investigator.prepare.features import Features
from investigator.prepare.roles import NUMERIC
from investigator.progress import Progress, silent
from investigator.structure.kinds import KindsOfNormal, calibrate_kinds


@dataclass(frozen=True)
class Effort:
    """How hard the randomised fits search: the MCD's random starts (robust_distance and the kinds of normal)
    and the isolation forest's trees. A scan uses :data:`FULL`; a peer-group segment's own scan uses
    :data:`SEGMENT` (pipeline/within.py says why and what it costs)."""

    mcd_starts: int = 500  # Rousseeuw & Van Driessen (1999) use 500
    forest_trees: int = 200


FULL = Effort()
# A segment's own fit: the MCD from DetMCD's deterministic starts alone (Hubert, Rousseeuw & Verdonck 2012, "A
# deterministic algorithm for robust location and scatter", JCGS 21: no random starts) and 25 isolation trees
# (Liu, Ting & Zhou 2008 find path lengths converge well before t = 100, from memory). Measured with
# benchmarks/within_speed.py --efforts (50,000 x 20 invented records in 40 segments of 11,739 down to 293, 1% planted
# within-segment outliers moved by 3 in 3 features): the AUC of the within consensus was 0.9758 with 500 starts x 200
# trees, 100 x 100, 50 x 50 and 0 x 50, 0.9759 with 0 x 25 and 0.9756 with 30 x 30; on 2026-12-04 the within scan
# took 42.1 s of CPU with 50 x 50, 36.3 s with 0 x 50 and 33.9 s with 0 x 25 (two BLAS threads then; one since).
SEGMENT = Effort(mcd_starts=0, forest_trees=25)


def build_methods(options: ScanOptions, features: Features, notices: list[str],
                  seed: int | None = None, effort: Effort = FULL) -> list[Method]:
    """The configured method objects; robust_distance uses every numeric feature."""
    seed = options.seed if seed is None else seed
    cutoff, contamination = options.cutoff, options.contamination
    built: list[Method] = []
    for key in options.methods:
        if key == "robust_distance":
            # The MCD measures numbers; category rarities are left to the other methods. Discrete and tied
            # numbers stay: a singular core is regularised (MRCD), not dropped.
            use = numeric_columns(features)
            left = [s.name for s in features.specs if s.role != NUMERIC]
            if not len(use):
                notices.append("robust_distance did not run: it needs at least one numeric feature")
                continue
            if left:
                notices.append(
                    f"robust_distance uses the {len(use)} numeric features of {len(features.specs)}; the "
                    f"categories ({', '.join(left)}) are used by the other methods"
                )
            built.append(RobustDistance(seed=seed, columns=use, exact=options.exact, cutoff=cutoff,
                                        contamination=contamination, n_starts=effort.mcd_starts))
        elif key == "isolation":
            built.append(Isolation(seed=seed, cutoff=cutoff, contamination=contamination,
                                   n_trees=effort.forest_trees))
        else:
            built.append(METHODS[key](cutoff=cutoff, contamination=contamination))
    if not built:
        raise InputError("no method could run on these features; choose other features or methods")
    return built


def numeric_columns(features: Features) -> np.ndarray:
    return np.array([j for j, s in enumerate(features.specs) if s.role == NUMERIC], dtype=int)


def fit_and_score(methods: list, X: np.ndarray, options: ScanOptions, reference: np.ndarray | None = None,
                  seed: int | None = None, progress: Progress = silent, X_ref: np.ndarray | None = None):
    """Fit every method on reference records and score all records of ``X``.

    The reference is either the rows ``reference`` of X (default: all of X; a record is never its own
    neighbour), or a separate matrix ``X_ref`` (novelty scoring). Returns the per-method results, the
    neighbour search and the records' neighbour graph.
    """
    separate = X_ref is not None
    R = X_ref if X_ref is not None else (X if reference is None else X[reference])
    plain = not separate and reference is None  # a plain scan: the records are the reference
    k = max((m.needs_neighbors for m in methods), default=0)
    search = graph = None
    if k:
        search = NeighborSearch(k, exact=options.exact, seed=options.seed if seed is None else seed).fit(R)
        if plain and search.mode_ == "exact":
            graph = search.reference_graph_
        else:
            graph = search.query(X, same_table=not separate)
    results: dict[str, MethodResult] = {}
    for i, method in enumerate(methods):
        progress(method.key, 0.2 + 0.7 * i / len(methods))
        method.fit(R, search if method.needs_neighbors else None)
        if plain and (not method.needs_neighbors or (search is not None and graph is search.reference_graph_)):
            scores = method.reference_scores_.copy()
        else:
            scores = method.score(X, graph) if method.needs_neighbors else method.score(X)
        results[method.key] = MethodResult.overall(method, scores)
    return results, search, graph


def combine_results(results: dict[str, MethodResult], options: ScanOptions, *, by_rank: bool = True,
                    combined_far: float | None = None):
    """The combination of the methods' results. ``by_rank=False`` leaves out the ranking that
    ``contamination`` flags by (a block of a larger dataset applies the fitted threshold instead).
    ``combined_far``: the far-out level of the combined evidence, fitted on the reference records (default:
    on the records combined, which in a plain scan are the reference)."""
    # hotelling is reported beside the others but does not vote: it measures the same Mahalanobis distance
    # as robust_distance with a classical fit, and would count that view twice.
    voting = {k: r for k, r in results.items() if r.method.votes}
    return combine({k: r.z for k, r in voting.items()}, {k: r.flags for k, r in voting.items()},
                   {k: r.far for k, r in voting.items()}, options.contamination if by_rank else None,
                   cutoff=options.cutoff, combined_far=combined_far)


def reference_combined_fence(results: dict[str, MethodResult]) -> float:
    """The far-out level of the combined evidence among the reference records themselves (novelty
    scoring: new records must not set the level they are judged by)."""

    voting = [r.method for r in results.values() if r.method.votes]
    Z = np.column_stack([m.standardise(m.reference_scores_) for m in voting])
    return combined_fence(trimmed_mean(Z))


def kinds_fitter(options: ScanOptions, seed: int | None = None, effort: Effort = FULL) -> FastMCD:
    """The MCD the kinds of normal are fitted with (robust_distance's configuration)."""
    return FastMCD(seed=options.seed if seed is None else seed, n_starts=effort.mcd_starts,
                   sample_above=None if options.exact else MCD_SAMPLE_ABOVE)


def apply_kinds(results: dict, kinds: KindsOfNormal, X: np.ndarray, labels: np.ndarray | None = None,
                calibrate_on: np.ndarray | None = None) -> dict:
    """New results with each record judged within its kind: robust_distance's score is the distance to its
    kind's fit, and every method's z-values, flags and cutoffs come from a per-kind calibration. The
    calibration is fitted here on the records at ``calibrate_on`` (default: all of them) unless a result
    already carries one (scoring new records with a fitted model). ``labels``: the records' kinds
    (default: the kinds' own labels). Nothing is changed in place."""
    labels = kinds.labels if labels is None else labels
    out = {}
    for key, r in results.items():
        if not r.method.votes:  # hotelling: a classical fit against the reference, no kinds
            out[key] = r
            continue
        if key == "robust_distance":
            scores = kinds.distances(X)[np.arange(len(X)), labels]
        else:
            scores = r.scores
        calibration = r.calibration
        if calibration is None:
            rows = np.arange(len(X)) if calibrate_on is None else calibrate_on
            calibration = calibrate_kinds(r.method, scores[rows], labels[rows])
        z, flags, cutoffs = calibration.apply(r.method, scores, labels)
        out[key] = MethodResult(key, r.method, scores, flags, z, cutoffs, calibration.far(labels), calibration)
    return out
