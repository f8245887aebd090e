"""The scan: load -> prepare -> neighbours -> methods -> combine -> column rules, into one ScanResult."""

from __future__ import annotations

import platform
from datetime import UTC, datetime

import numpy as np

from .combine import combine
from .errors import InputError
from .features import FeaturePreparer, Features
from .methods import METHODS
from .methods.column_rules import ColumnRules
from .neighbors import NeighborSearch
from .options import ScanOptions
from .progress import Progress, silent
from .result import MethodResult, ScanResult
from .roles import assign_roles
from .table import Table, load_table


def build_methods(options: ScanOptions, features: Features, notices: list[str],
                  seed: int | None = None) -> list:
    """The configured method objects; robust_distance leaves out features too discrete for the MCD."""
    seed = options.seed if seed is None else seed
    common = {"cutoff": options.cutoff, "contamination": options.contamination}
    built = []
    for key in options.methods:
        if key == "robust_distance":
            # The MCD assumes continuous, roughly elliptical data. Category rarities and numeric features
            # whose MAD is zero (over half the records share one value) make its core covariance singular
            # or meaningless; the other methods still use them.
            use = [j for j, s in enumerate(features.specs) if s.scale_method == "MAD"]
            left = [s.name for s in features.specs if s.scale_method != "MAD"]
            if not use:
                notices.append("robust_distance did not run: it needs a numeric feature whose values vary "
                               "for over half the records")
                continue
            if left:
                notices.append(
                    f"robust_distance uses {len(use)} of {len(features.specs)} features; it leaves out "
                    f"{', '.join(left)} (categories, or over half the records at one value); the other "
                    "methods use them"
                )
            built.append(METHODS[key](seed=seed, columns=np.array(use), exact=options.exact, **common))
        elif key == "isolation":
            built.append(METHODS[key](seed=seed, **common))
        else:
            built.append(METHODS[key](**common))
    if not built:
        raise InputError("no method could run on these features; choose other features or methods")
    return built


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
    ref_info = None
    if reference is not None:
        from .reference import check_columns, clean_reference

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
        notices.append(f"only {n} records: neighbour methods use k = {search.k_} instead of {search.k}")
    rd = results.get("robust_distance")
    if rd is not None and rd.method.mcd_.ridge:
        notices.append(
            "robust_distance: the core covariance is singular (features collinear within the core "
            f"records); a ridge of {rd.method.mcd_.ridge:.1e} keeps distances finite"
        )
    if "hotelling" in results:
        notices += results["hotelling"].method.notices_
    progress("combining", 0.92)
    combination = combine_results(results, options)
    grouping = coords = map_info = None
    kinds: list[np.ndarray] = []
    if reference is None:
        progress("groups", 0.93)
        grouping, combination, kinds = _structure(features.values, results, combination, options, notices)
        if options.map != "none":
            from .structure.map import embed

            progress("map", 0.95)
            mapped = embed(features.values, options.map, seed=options.seed, keep=combination.flagged)
            coords, map_info = mapped.coords, mapped.describe()
            notices += list(mapped.notices)
    stability = None
    if options.resamples:
        from .explain.stability import flag_stability

        stability = flag_stability(features, options, progress, X_ref=X_ref, kinds=kinds)
    rules = ColumnRules().fit(ref_features)
    for name in rules.skipped_:
        notices.append(f"column '{name}': MAD is zero, so the modified z-score rule is skipped there")
    hits = rules.hits(features)
    extras = _extras(table, options, notices)
    run = _run_record(table, options, columns, preparer, search, results, combination, rules, notices,
                      started)
    if reference is not None:
        run["reference"] = {"input": {**reference.source.as_dict(), "rows": ref_info["rows"]},
                            "used": int(reference.n_rows), **{k: v for k, v in ref_info.items() if k != "rows"}}
    from .approximations import approximations

    n_ordinary = n if reference is not None else int((~combination.flagged).sum())
    run["approximations"] = approximations(n, n_ordinary, options, search, results)
    run["screens"] = extras["screens"] or None
    if grouping is not None:
        run["structure"] = grouping.describe()
    if map_info is not None:
        run["map"] = map_info
    progress("done", 1.0)
    result = ScanResult(table, options, columns, features, preparer, search, graph, results, combination,
                        rules, hits, run, stability, reference=reference,
                        reference_features=ref_features if reference is not None else None,
                        out_of_spec=extras["out_of_spec"], groups=grouping, map=coords)
    if grouping is not None:
        result.group_cases = _group_cases(result, grouping)
    return result


def _structure(X: np.ndarray, results: dict, combination, options: ScanOptions, notices: list[str]):
    """Small groups, large clusters (kinds of normal) and each flagged record's pattern.

    With two or more kinds of normal, robust_distance (one ellipse for all records) would flag the smaller
    kinds for being far from the largest; it is refitted with one MCD per kind and measures each record
    against the nearest kind, and the combination is redone.
    """
    from .structure.groups import find_groups

    grouping = find_groups(X, combination.flagged, seed=options.seed)
    notices += list(grouping.notices)
    kinds = [grouping.members(g) for g in grouping.large_ids]
    rd = results.get("robust_distance")
    if len(kinds) < 2 or rd is None:
        return grouping, combination, []
    rd.method.fit_kinds(X, kinds)
    rd.method._fit_scale(rd.method.reference_scores_)
    scores = rd.method.score(X)
    results["robust_distance"] = MethodResult(rd.key, rd.method, scores, rd.method.flags(scores),
                                              rd.method.unify(scores))
    labels = np.full(len(X), -1)
    for k, m in enumerate(kinds):
        labels[m] = k
    for key, r in list(results.items()):
        if key in ("robust_distance", "hotelling"):
            continue
        # The density and isolation scores of a sparser kind run higher; each kind is judged by its own.
        z, flags = r.method.calibrate_kinds(r.scores, labels)
        from .methods.base import gaussian_scaling

        results[key] = MethodResult(key, r.method, r.scores, flags, gaussian_scaling(z), z)
    sizes = ", ".join(f"{len(m):,}" for m in kinds)
    notices.append(f"the records form {len(kinds)} large clusters (kinds of normal, {sizes} records); "
                   "robust_distance measures each record against the nearest of them, and the other methods' "
                   "cutoffs are set within each")
    combination = combine_results(results, options)
    return find_groups(X, combination.flagged, seed=options.seed), combination, kinds


def _group_cases(result: ScanResult, grouping) -> list[dict]:
    """Each small group as one case: size, members and what they share that the rest does not."""
    from .structure.profile import group_profile

    cases = []
    for gid in grouping.small_ids:
        members = grouping.members(gid)
        mask = np.zeros(result.n_records, dtype=bool)
        mask[members] = True
        cases.append({
            "group": int(gid), "size": int(len(members)),
            "members": [{"row": int(i) + 1, "key": result.keys[i]} for i in members],
            "flagged": int(result.flagged[members].sum()),
            "profile": group_profile(mask, result.features, result.table.frame),
        })
    return cases


def _reference_only_methods(options: ScanOptions, methods: list) -> list:
    """Hotelling T-squared is a reference-mode method; it uses the robust distance's features."""
    from .methods.hotelling import Hotelling

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
        from .features import column_numbers
        from .screens.benford import benford_test

        screens["benford"] = {}
        for col in options.digits:
            if col not in table.frame.columns:
                raise InputError(f"{table.name}: --digits names column '{col}', which is not in the file")
            values = column_numbers(table.frame[col])
            screens["benford"][col] = {
                "first_digit": benford_test(values, 1, name=col).as_dict(),
                "first_two_digits": benford_test(values, 2, name=col).as_dict(),
            }
    from .screens.duplicates import duplicates_on, exact_duplicates

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
        from .limits import load_limits, spec_hits

        out_of_spec = spec_hits(table, load_limits(options.limits, table))
    return {"screens": screens, "out_of_spec": out_of_spec}


def fit_and_score(methods: list, X: np.ndarray, options: ScanOptions, reference: np.ndarray | None = None,
                  seed: int | None = None, progress: Progress = silent, X_ref: np.ndarray | None = None):
    """Fit every method on reference records and score all records of ``X``.

    The reference is either the rows ``reference`` of X (default: all of X; a record that is also a
    reference record is never its own neighbour), or a separate matrix ``X_ref`` (novelty scoring).
    Returns the per-method results, the neighbour search and the records' neighbour graph.
    """
    n = len(X)
    separate = X_ref is not None
    rows = None if separate else (np.arange(n) if reference is None else reference)
    R = X_ref if separate else X[rows]
    k = max((m.needs_neighbors for m in methods), default=0)
    search = graph = None
    if k:
        search = NeighborSearch(k, exact=options.exact, seed=options.seed if seed is None else seed)
        search.fit(R, rows=rows)
        graph = search.query(X, rows=None if separate else np.arange(n))
    results: dict[str, MethodResult] = {}
    for i, method in enumerate(methods):
        progress(method.key, 0.2 + 0.7 * i / len(methods))
        ref_graph = search.reference_graph_ if method.needs_neighbors else None
        method.fit(R, ref_graph)
        plain = rows is not None and len(rows) == n  # a plain scan: the records are the reference
        if plain and (not method.needs_neighbors or graph is search.reference_graph_):
            scores = method.reference_scores_.copy()
        else:
            scores = method.score(X, graph) if method.needs_neighbors else method.score(X)
        results[method.key] = MethodResult(method.key, method, scores, method.flags(scores),
                                           method.unify(scores))
    return results, search, graph


def combine_results(results: dict[str, MethodResult], options: ScanOptions, *, by_rank: bool = True):
    """The combination of the methods' results. ``by_rank=False`` leaves out the ranking that
    ``contamination`` flags by (a block of a larger dataset applies the fitted threshold instead)."""
    # hotelling is reported beside the others but does not vote: it measures the same Mahalanobis distance
    # as robust_distance with a classical fit, and would count that view twice.
    voting = {k: r for k, r in results.items() if k in METHODS}
    return combine({k: r.method.standardise(r.scores) if r.z is None else r.z for k, r in voting.items()},
                   {k: r.flags for k, r in voting.items()}, options.contamination if by_rank else None)


def _versions() -> dict:
    import pandas
    import scipy
    import sklearn

    from . import __version__

    return {"investigator": __version__, "python": platform.python_version(), "numpy": np.__version__,
            "pandas": pandas.__version__, "scipy": scipy.__version__, "scikit-learn": sklearn.__version__}


def _run_record(table, options, columns, preparer, search, results, combination, rules, notices,
                started) -> dict:
    return {
        "started": started,
        "input": {**table.source.as_dict(), "rows": table.n_rows, "columns": int(table.frame.shape[1]),
                  "key": table.key_column or "row"},
        "columns": [c.as_dict() for c in columns],
        "features": [s.as_dict() for s in preparer.specs_],
        "parameters": options.as_dict(),
        "seed": options.seed,
        "versions": _versions(),
        "neighbors": search.describe() if search is not None else None,
        "methods": {k: r.method.describe() for k, r in results.items()},
        "column_rules": rules.describe(),
        "rule": combination.rule,
        "flagged": int(combination.flagged.sum()),
        "notices": notices,
    }


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

    from .review.store import default_store_path

    if store is None:
        if not isinstance(data, str | Path):
            return result
        store = default_store_path(data)
        if not Path(store).exists():
            return result
    from .review.matching import match_store
    from .review.store import ReviewStore

    with ReviewStore(store, create=False) as review:
        matching = match_store(result.table, review)
    result.verdicts, result.notes = matching.verdicts(), matching.notes()
    result.run["review_store"] = str(store)
    return result


def check(data, *, reference, progress: Progress = silent, reference_sheet: str | None = None,
          store=None, **options) -> ScanResult:
    """Score the records of ``data`` against a trusted ``reference`` table (paths or DataFrames).

    Preparation and every method are fitted on the reference only, after phase I cleaning (records the
    robust fit flags in the reference are excluded unless ``keep_reference_outliers=True``); the records of
    ``data`` are scored against it. Same options as :func:`scan`; the result has the same contract, with
    ``run["reference"]`` describing the reference.
    """
    opts = options.pop("options", None)
    if opts is None:
        opts = ScanOptions(**options)
    elif options:
        raise TypeError("give either options=ScanOptions(...) or keyword options, not both")
    ref = load_table(reference, sheet=reference_sheet, id_column=opts.id)
    table = load_table(data, sheet=opts.sheet, id_column=opts.id, min_rows=1)
    return attach_verdicts(run_scan(table, opts, progress, reference=ref), data, store)
