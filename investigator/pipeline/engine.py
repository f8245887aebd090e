"""The scan: load -> prepare -> neighbours -> methods -> combine -> column rules, into one ScanResult."""

from __future__ import annotations

import dataclasses
import platform
from datetime import UTC, datetime

import numpy as np

from investigator.errors import InputError
from investigator.io.tables import Table, load_table
from investigator.methods import METHODS, Isolation, RobustDistance
from investigator.methods.base import Method
from investigator.methods.column_rules import ColumnRules
from investigator.methods.mcd import SAMPLE_ABOVE as MCD_SAMPLE_ABOVE
from investigator.methods.mcd import FastMCD
from investigator.methods.neighbors import NeighborSearch
from investigator.pipeline.combine import combine
from investigator.pipeline.options import ScanOptions
from investigator.pipeline.result import MethodResult, ScanResult
from investigator.pipeline.run_record import (
    InputRecord,
    KindsRecord,
    MapRecord,
    MethodFit,
    NeighborRecord,
    ReferenceRecord,
    RunRecord,
)
from investigator.prepare.features import FeaturePreparer, Features
from investigator.prepare.roles import NUMERIC, assign_roles
from investigator.progress import Progress, silent
from investigator.structure.kinds import KindsOfNormal, calibrate_kinds, find_kinds


def build_methods(options: ScanOptions, features: Features, notices: list[str],
                  seed: int | None = None) -> list[Method]:
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
                                        contamination=contamination))
        elif key == "isolation":
            built.append(Isolation(seed=seed, cutoff=cutoff, contamination=contamination))
        else:
            built.append(METHODS[key](cutoff=cutoff, contamination=contamination))
    if not built:
        raise InputError("no method could run on these features; choose other features or methods")
    return built


def numeric_columns(features: Features) -> np.ndarray:
    return np.array([j for j, s in enumerate(features.specs) if s.role == NUMERIC], dtype=int)


def run_scan(table: Table, options: ScanOptions, progress: Progress = silent,
             reference: Table | None = None) -> ScanResult:
    """Scan ``table``; with ``reference``, fit preparation and methods on the reference and score the table's
    records against it (novelty scoring: no record of the table is part of the fit)."""
    started = datetime.now(UTC).replace(microsecond=0).isoformat()
    notices = list(table.notices)
    progress("preparing features", 0.02)
    fit_table = reference if reference is not None else table
    columns = assign_roles(fit_table, options.features, options.exclude)
    log = options.log if isinstance(options.log, str) else list(options.log)
    ref_info: dict = {}  # reference mode: the reference's columns, phase I cleaning and unseen levels
    if reference is not None:
        from investigator.pipeline.reference import check_columns, clean_reference

        notices += [f"reference: {n}" for n in reference.notices]
        ref_info = check_columns(table, reference, columns, notices)
        preparer = FeaturePreparer(log=log).fit(reference, columns)
        reference, ref_info["phase_i"] = clean_reference(reference, preparer, options, notices)
        preparer = FeaturePreparer(log=log).fit(reference, columns)
        ref_features = preparer.transform(reference)
        features = preparer.transform(table)
        ref_info["unseen_levels"] = _unseen_levels(preparer, table, notices)
    else:
        preparer = FeaturePreparer(log=log).fit(table, columns)
        features = ref_features = preparer.transform(table)
    notices += preparer.notices_
    n, p = ref_features.values.shape
    if n <= p:
        raise InputError(
            f"{fit_table.name}: {n} rows but {p} features; a scan needs more rows than features "
            "(leave some out with --exclude, or add rows)"
        )
    methods = build_methods(options, ref_features, notices)
    if reference is not None:
        methods += _reference_only_methods(options, methods)
    progress("scoring", 0.1)
    X_ref = ref_features.values if reference is not None else None
    results, search, graph = fit_and_score(methods, features.values, options, X_ref=X_ref, progress=progress)
    if search is not None and search.k_ < search.k:
        notices.append(f"only {len(search.locations_)} distinct records: neighbour methods use k = {search.k_} "
                       f"distinct neighbours instead of {search.k}")
    rd = results.get("robust_distance")
    if rd is not None and rd.method.mcd_.regularised:
        fit = rd.method.mcd_
        where = fit.filled or fit.reweighted_filled
        notices.append(
            "robust_distance: over half the records lie on one hyperplane (ties or copies), so the MCD core "
            "is singular; the core was found as the MRCD finds it (Boudt et al. 2020"
            + (f", rho = {fit.rho:.3g}" if fit.rho else "") + ")"
            + (f", and in the {where} direction{'s' if where > 1 else ''} where it does not vary, distances use "
               "the spread of all records" if where else "")
        )
    if "hotelling" in results:
        notices += results["hotelling"].method.notices_
    progress("combining", 0.92)
    combination = combine_results(results, options,
                                  combined_far=reference_combined_fence(results) if reference is not None else None)
    grouping = coords = mapped = kinds = None
    if reference is None:
        progress("groups", 0.93)
        kinds, results, combination = _kinds_of_normal(features, results, combination, options, notices)
        from investigator.structure.groups import find_groups

        grouping = find_groups(features.values, combination.flagged, seed=options.seed,
                               kind_labels=None if kinds is None else kinds.labels)
        notices += list(grouping.notices)
        if options.map != "none":
            from investigator.structure.map import embed

            progress("map", 0.95)
            mapped = embed(features.values, options.map, seed=options.seed, keep=combination.flagged)
            coords = mapped.coords
            notices += list(mapped.notices)
    stability = None
    if options.resamples:
        from investigator.pipeline.stability import flag_stability

        stability = flag_stability(features, options, progress, X_ref=X_ref, kinds=kinds)
    rules = ColumnRules().fit(ref_features)
    for name in rules.skipped_:
        notices.append(f"column '{name}': MAD is zero, so the modified z-score rule is skipped there")
    hits = rules.hits(features)
    extras = _extras(table, options, notices)
    from investigator.pipeline.approximations import approximations

    n_ordinary = n if reference is not None else int((~combination.flagged).sum())
    run = RunRecord(
        started=started,
        input=InputRecord(**table.source.as_dict(), rows=table.n_rows, columns=int(table.frame.shape[1]),
                          key=table.key_column or "row"),
        columns=tuple(columns),
        features=tuple(preparer.specs_),
        parameters=options.as_dict(),
        seed=options.seed,
        versions=_versions(),
        neighbors=NeighborRecord(**search.describe()) if search is not None else None,
        method_fits={k: MethodFit(**r.method.describe()) for k, r in results.items()},
        column_rules=rules.describe(),
        rule=combination.rule,
        flagged=int(combination.flagged.sum()),
        notices=tuple(notices),
        kinds=_kinds_record(kinds, results) if kinds is not None else None,
        reference=_reference_record(reference, ref_info) if reference is not None else None,
        approximations=approximations(n, n_ordinary, options, search, results),
        screens=extras["screens"] or None,
        structure=grouping.describe() if grouping is not None else None,
        map=MapRecord(mapped.method, dict(mapped.parameters), tuple(mapped.notices)) if mapped is not None else None,
    )
    progress("done", 1.0)
    result = ScanResult(table, options, columns, features, preparer, search, graph, results, combination,
                        rules, hits, run, stability, reference=reference,
                        reference_features=ref_features if reference is not None else None,
                        out_of_spec=extras["out_of_spec"], groups=grouping, map=coords, kinds=kinds)
    if grouping is not None:
        from investigator.structure.cases import group_cases

        result.group_cases = group_cases(grouping, features, table.frame, combination.flagged, table.keys)
    return result


def _kinds_record(kinds: KindsOfNormal, results: dict[str, MethodResult]) -> KindsRecord:
    calibrated = {k: r.calibration for k, r in results.items() if r.calibration is not None}
    return KindsRecord(dict(kinds.parameters), kinds.sizes(),
                       {k: [float(sc.cutoff) for sc in c.scales] for k, c in calibrated.items()},
                       {k: [float(sc.far) for sc in c.scales] for k, c in calibrated.items()})


def _reference_record(reference: Table, info: dict) -> ReferenceRecord:
    return ReferenceRecord(InputRecord(**reference.source.as_dict(), rows=info["rows"]), int(reference.n_rows),
                           info["extra_columns"], info["missing_columns"], info["phase_i"], info["unseen_levels"])


def kinds_fitter(options: ScanOptions, seed: int | None = None) -> FastMCD:
    """The MCD the kinds of normal are fitted with (robust_distance's configuration)."""
    return FastMCD(seed=options.seed if seed is None else seed,
                   sample_above=None if options.exact else MCD_SAMPLE_ABOVE)


def _kinds_of_normal(features: Features, results: dict, combination, options: ScanOptions,
                     notices: list[str]):
    """Find the kinds of normal; with two or more, every method judges each record within its kind
    (robust_distance measures it against its kind's fit) and the combination is redone."""
    columns = numeric_columns(features)
    kinds = find_kinds(features.values, columns, kinds_fitter(options), seed=options.seed, notices=notices)
    if kinds is None:
        return None, results, combination
    results = apply_kinds(results, kinds, features.values)
    sizes = ", ".join(f"{s:,}" for s in kinds.sizes())
    notices.append(f"the records form {kinds.n_kinds} kinds of normal ({sizes} records); every record belongs "
                   "to the kind it is nearest to, and every method's cutoff is set within each kind")
    return kinds, results, combine_results(results, options)


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


def _reference_only_methods(options: ScanOptions, methods: list) -> list:
    """Hotelling T-squared is a reference-mode method; it uses the robust distance's features."""
    from investigator.methods.hotelling import Hotelling

    rd = next((m for m in methods if m.key == "robust_distance"), None)
    if rd is None:
        return []
    return [Hotelling(cutoff=options.cutoff, contamination=options.contamination, columns=rd.columns)]


def _unseen_levels(preparer: FeaturePreparer, table: Table, notices: list[str]) -> dict:
    out = {}
    for spec in preparer.specs_:
        if spec.role != "categorical":
            continue
        levels = table.frame[spec.name].astype("string").fillna("(missing)")
        unseen = levels[~levels.isin(list(spec.levels))]
        if len(unseen):
            counts = unseen.value_counts()
            out[spec.name] = {str(k): int(v) for k, v in counts.items()}
            shown = ", ".join(f"'{k}'" for k in list(counts.index)[:5])
            notices.append(
                f"column '{spec.name}': {len(unseen)} record{'s' if len(unseen) > 1 else ''} with level"
                f"{'s' if len(counts) > 1 else ''} the reference never has ({shown}); they count as rarer than "
                "any reference level"
            )
    return out


def _extras(table: Table, options: ScanOptions, notices: list[str]) -> dict:
    """The trade's own screens (Benford, duplicates) and specification limits, on the scanned records."""
    screens: dict = {}
    if options.digits:
        from investigator.checks.benford import benford_test
        from investigator.prepare.features import column_numbers

        screens["benford"] = {}
        for col in options.digits:
            if col not in table.frame.columns:
                raise InputError(f"{table.name}: --digits names column '{col}', which is not in the file")
            values = column_numbers(table.frame[col])
            screens["benford"][col] = {
                "first_digit": benford_test(values, 1, name=col).as_dict(),
                "first_two_digits": benford_test(values, 2, name=col).as_dict(),
            }
    from investigator.checks.duplicates import duplicates_on, exact_duplicates

    exclude = [table.key_column] if table.key_column else []
    exact = exact_duplicates(table.frame, exclude=exclude)
    if exact.n_groups:
        screens["exact_duplicates"] = exact.as_dict()
        notices.append(f"{exact.n_in_groups} records are exact copies of another record "
                       f"({exact.n_groups} groups); see run.screens.exact_duplicates")
    if options.duplicates:
        screens["duplicates"] = duplicates_on(table.frame, list(options.duplicates)).as_dict()
    out_of_spec = None
    if options.limits:
        from investigator.checks.limits import load_limits, spec_hits

        out_of_spec = spec_hits(table, load_limits(options.limits, table))
    return {"screens": screens, "out_of_spec": out_of_spec}


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
    from investigator.pipeline.combine import combined_fence, trimmed_mean

    voting = [r.method for r in results.values() if r.method.votes]
    Z = np.column_stack([m.standardise(m.reference_scores_) for m in voting])
    return combined_fence(trimmed_mean(Z))


def _versions() -> dict:
    import pandas
    import scipy
    import sklearn

    from investigator import __version__

    return {"investigator": __version__, "python": platform.python_version(), "numpy": np.__version__,
            "pandas": pandas.__version__, "scipy": scipy.__version__, "scikit-learn": sklearn.__version__}


def scan(data, *, progress: Progress = silent, store=None, **options) -> ScanResult:
    """Scan a table (a path to CSV/TSV/Parquet/XLSX, or a pandas DataFrame) and return a ScanResult.

    Options are those of ``investigator scan``: ``id``, ``features``, ``exclude``, ``methods``, ``log``,
    ``cutoff``, ``contamination``, ``seed``, ``sheet``, ``exact``, ``resamples``, ``digits``,
    ``duplicates``, ``limits``. When a review store exists (``store``, or ``<data>.investigation.sqlite``
    beside a data file), each record also gets its current verdict and note. Raises :class:`InputError` on
    bad input.
    """
    opts = options.pop("options", None)
    if opts is None:
        opts = ScanOptions(**options)
    elif options:
        raise TypeError("give either options=ScanOptions(...) or keyword options, not both")
    table = load_table(data, sheet=opts.sheet, id_column=opts.id)
    return attach_verdicts(run_scan(table, opts, progress), data, store)


def attach_verdicts(result: ScanResult, data, store=None) -> ScanResult:
    """Add the current verdict and note of each record when a review store exists (``store`` or the
    default beside the data file); a store is only read here, never created."""
    from pathlib import Path

    from investigator.review.store import default_store_path

    if store is None:
        if not isinstance(data, str | Path):
            return result
        store = default_store_path(data)
        if not Path(store).exists():
            return result
    from investigator.review.matching import match_store
    from investigator.review.store import ReviewStore

    with ReviewStore(store, create=False) as review:
        matching = match_store(result.table, review)
    result.verdicts, result.notes = matching.verdicts(), matching.notes()
    result.run = dataclasses.replace(result.run, review_store=str(store))
    return result


def check(data, *, reference, progress: Progress = silent, reference_sheet: str | None = None,
          store=None, **options) -> ScanResult:
    """Score the records of ``data`` against a trusted ``reference`` table (paths or DataFrames).

    Preparation and every method are fitted on the reference only, after phase I cleaning (records the
    robust fit flags in the reference are excluded unless ``keep_reference_outliers=True``); the records of
    ``data`` are scored against it. Same options as :func:`scan`; the result has the same contract, with
    ``run.reference`` describing the reference.
    """
    opts = options.pop("options", None)
    if opts is None:
        opts = ScanOptions(**options)
    elif options:
        raise TypeError("give either options=ScanOptions(...) or keyword options, not both")
    ref = load_table(reference, sheet=reference_sheet, id_column=opts.id)
    table = load_table(data, sheet=opts.sheet, id_column=opts.id, min_rows=1)
    return attach_verdicts(run_scan(table, opts, progress, reference=ref), data, store)
