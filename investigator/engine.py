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
            built.append(METHODS[key](seed=seed, columns=np.array(use), **common))
        elif key == "isolation":
            built.append(METHODS[key](seed=seed, **common))
        else:
            built.append(METHODS[key](**common))
    if not built:
        raise InputError("no method could run on these features; choose other features or methods")
    return built


def run_scan(table: Table, options: ScanOptions, progress: Progress = silent) -> ScanResult:
    started = datetime.now(UTC).replace(microsecond=0).isoformat()
    notices = list(table.notices)
    progress("preparing features", 0.02)
    columns = assign_roles(table, options.features, options.exclude)
    log = options.log if isinstance(options.log, str) else list(options.log)
    preparer = FeaturePreparer(log=log).fit(table, columns)
    notices += preparer.notices_
    features = preparer.transform(table)
    n, p = features.values.shape
    if n <= p:
        raise InputError(
            f"{table.name}: {n} rows but {p} features; a scan needs more rows than features "
            "(leave some out with --exclude, or add rows)"
        )
    methods = build_methods(options, features, notices)
    progress("scoring", 0.1)
    results, search, graph = fit_and_score(methods, features.values, options, progress=progress)
    if search is not None and search.k_ < search.k:
        notices.append(f"only {n} records: neighbour methods use k = {search.k_} instead of {search.k}")
    rd = results.get("robust_distance")
    if rd is not None and rd.method.mcd_.ridge:
        notices.append(
            "robust_distance: the core covariance is singular (features collinear within the core "
            f"records); a ridge of {rd.method.mcd_.ridge:.1e} keeps distances finite"
        )
    progress("combining", 0.92)
    combination = combine_results(results, options)
    stability = None
    if options.resamples:
        from .explain.stability import flag_stability

        stability = flag_stability(features, options, progress)
    rules = ColumnRules().fit(features)
    for name in rules.skipped_:
        notices.append(f"column '{name}': MAD is zero, so the modified z-score rule is skipped there")
    hits = rules.hits(features)
    run = _run_record(table, options, columns, preparer, search, results, combination, rules, notices,
                      started)
    progress("done", 1.0)
    return ScanResult(table, options, columns, features, preparer, search, graph, results, combination,
                      rules, hits, run, stability)


def fit_and_score(methods: list, X: np.ndarray, options: ScanOptions, reference: np.ndarray | None = None,
                  seed: int | None = None, progress: Progress = silent):
    """Fit every method on the reference records (default: all) and score all records.

    A record that is also a reference record is never its own neighbour. Returns the per-method results,
    the neighbour search and the records' neighbour graph.
    """
    n = len(X)
    rows = np.arange(n) if reference is None else reference
    k = max((m.needs_neighbors for m in methods), default=0)
    search = graph = None
    if k:
        search = NeighborSearch(k, exact=options.exact, seed=options.seed if seed is None else seed)
        search.fit(X[rows], rows=rows)
        graph = search.query(X, rows=np.arange(n))
    results: dict[str, MethodResult] = {}
    for i, method in enumerate(methods):
        progress(method.key, 0.2 + 0.7 * i / len(methods))
        ref_graph = search.reference_graph_ if method.needs_neighbors else None
        method.fit(X[rows], ref_graph)
        scores = method.score(X, graph) if method.needs_neighbors else method.score(X)
        results[method.key] = MethodResult(method.key, method, scores, method.flags(scores),
                                           method.unify(scores))
    return results, search, graph


def combine_results(results: dict[str, MethodResult], options: ScanOptions):
    return combine({k: r.method.standardise(r.scores) for k, r in results.items()},
                   {k: r.flags for k, r in results.items()}, options.contamination)


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


def scan(data, *, progress: Progress = silent, **options) -> ScanResult:
    """Scan a table (a path to CSV/TSV/Parquet/XLSX, or a pandas DataFrame) and return a ScanResult.

    Options are those of ``investigator scan``: ``id``, ``features``, ``exclude``, ``methods``, ``log``,
    ``cutoff``, ``contamination``, ``seed``, ``sheet``, ``exact``. Raises :class:`InputError` on bad input.
    """
    opts = options.pop("options", None)
    if opts is None:
        opts = ScanOptions(**options)
    elif options:
        raise TypeError("give either options=ScanOptions(...) or keyword options, not both")
    table = load_table(data, sheet=opts.sheet, id_column=opts.id)
    return run_scan(table, opts, progress)
