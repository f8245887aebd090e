"""The scan: load -> prepare -> neighbours -> methods -> combine -> column rules, into one ScanResult."""

from __future__ import annotations

import dataclasses
import platform
from collections.abc import Callable
from datetime import UTC, datetime

import numpy as np
import pandas
import scipy
import sklearn

from investigator.checks.benford import benford_test
from investigator.checks.duplicates import duplicates_on, exact_duplicates
from investigator.checks.last_digits import last_two_digits
from investigator.checks.limits import load_limits, spec_hits
from investigator.checks.round_amounts import round_amounts
from investigator.checks.thresholds import threshold_test
from investigator.errors import InputError
from investigator.io.tables import Table, load_table, name_list
from investigator.methods.column_rules import ColumnRules
from investigator.methods.hotelling import Hotelling
from investigator.pipeline.approximations import approximations
from investigator.pipeline.options import ScanOptions
from investigator.pipeline.priority import learn as learn_priority
from investigator.pipeline.reference import check_columns, clean_reference
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
from investigator.pipeline.scan_cache import cache_entry
from investigator.pipeline.scoring import (
    FULL,
    SEGMENT,
    Effort,
    apply_kinds,
    build_methods,
    combine_results,
    fit_and_score,
    kinds_fitter,
    numeric_columns,
    reference_combined_fence,
)
from investigator.pipeline.stability import flag_stability
from investigator.pipeline.threads import on_one_blas_thread
from investigator.pipeline.within import check_within, peer_groups
from investigator.prepare.calendar import calendar_columns
from investigator.prepare.features import FeaturePreparer, Features, beyond_bound_notices, column_numbers
from investigator.prepare.roles import assign_roles
from investigator.progress import Progress, silent
from investigator.review.matching import Matching, match_store
from investigator.review.store import ReviewStore
from investigator.review.stores import GIVEN, find_store
from investigator.structure.groups import find_groups
from investigator.structure.kinds import KindsOfNormal, find_kinds
from investigator.structure.map import embed
from investigator.version import __version__


@on_one_blas_thread
def run_scan(table: Table, options: ScanOptions, progress: Progress = silent,
             reference: Table | None = None, *, groups: bool = True, screens: bool = True,
             effort: Effort = FULL, kinds_from: np.ndarray | str | None = "search") -> ScanResult:
    """Scan ``table``; with ``reference``, fit preparation and methods on the reference and score the table's
    records against it (novelty scoring: no record of the table is part of the fit). ``groups=False`` leaves
    out the small groups and their cases (a segment's own scan, whose groups nobody reads; its scores and flags
    are the same); ``screens=False`` leaves out the trade's screens and the exact copies (a segment's own scan:
    they are the whole table's). ``effort``: how hard the randomised fits search
    (:class:`~investigator.pipeline.scoring.Effort`; a segment's own scan uses ``SEGMENT``). ``kinds_from``:
    ``"search"`` looks for the kinds of normal; an array gives the kind of each record as the whole table's scan
    found it, taken as the candidates (a segment's own scan: structure/kinds.py ``find_kinds``); None: one kind
    (a segment of a table that is one kind of normal)."""
    started = datetime.now(UTC).replace(microsecond=0).isoformat()
    notices = list(table.notices)
    original_reference = reference  # a segment's check cleans its own reference records (phase I)
    if options.within:
        check_within(table, options, reference)  # before the work: a bad column is reported at once
    progress("preparing features", 0.02)
    amount_numbers = _amount_columns(table, options)  # a wrong amount column stops the scan before it starts
    fit_table = reference if reference is not None else table
    columns = assign_roles(fit_table, options.features, options.exclude)
    calendar, columns, fit_view = calendar_columns(fit_table, columns, options)
    view = fit_view if reference is None else None  # the table as the calendar read it, when fitted on it
    notices += calendar.notices_
    log = options.log if isinstance(options.log, str) else list(options.log)
    ref_info: dict = {}  # reference mode: the reference's columns, phase I cleaning and unseen levels
    if reference is not None:
        notices += [f"reference: {n}" for n in reference.notices]
        ref_info = check_columns(table, reference, columns, notices)
        preparer = FeaturePreparer(log=log, calendar=calendar).fit(reference, columns)
        reference, ref_info["phase_i"] = clean_reference(reference, preparer, options, notices)
        preparer = FeaturePreparer(log=log, calendar=calendar).fit(reference, columns)
        ref_features = preparer.transform(reference)
        features = preparer.transform(table)
        ref_info["unseen_levels"] = _unseen_levels(preparer, table, notices)
    else:
        preparer = FeaturePreparer(log=log, calendar=calendar).fit(table, columns, view)
        features = ref_features = preparer.transform(table, view)
    notices += preparer.notices_
    if reference is not None:
        notices += [f"reference: {n}" for n in beyond_bound_notices(ref_features, reference.row_numbers)]
    notices += beyond_bound_notices(features, table.row_numbers)
    n, p = ref_features.values.shape
    if n <= p:
        raise InputError(
            f"{fit_table.name}: {n} rows but {p} features; a scan needs more rows than features "
            "(leave some out with `exclude`, or add rows)", parameters=("exclude",)
        )
    X_fit = ref_features.values
    if not (X_fit != X_fit[0]).any():
        # Only possible where the fit records are copies of one another on every feature (a reference whose
        # phase I cleaning left copies): no method can rank records without two different ones.
        raise InputError(
            f"{fit_table.name}: every record {'left after phase I cleaning ' if reference is not None else ''}"
            f"is alike on the features as prepared ({', '.join(ref_features.names[:5])}; a category counts by how "
            "rare each level is, so equally common levels are alike); a scan needs at least two records that "
            "differ" + (" (keep the others with `keep_reference_outliers`)" if reference is not None else ""),
            parameters=("keep_reference_outliers",) if reference is not None else ())
    methods = build_methods(options, ref_features, notices, effort=effort)
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
        if kinds_from is not None:
            kinds, results, combination = _kinds_of_normal(features, results, combination, options, notices,
                                                           effort, None if isinstance(kinds_from, str) else kinds_from)
        if groups:
            grouping = find_groups(features.values, combination.flagged, seed=options.seed,
                                   kind_labels=None if kinds is None else kinds.labels)
            notices += list(grouping.notices)
        if options.map != "none":
            progress("map", 0.95)
            mapped = embed(features.values, options.map, seed=options.seed, keep=combination.flagged)
            coords = mapped.coords
            notices += list(mapped.notices)
    stability = None
    if options.resamples:
        stability = flag_stability(features, options, progress, X_ref=X_ref, kinds=kinds)
    rules = ColumnRules().fit(ref_features, skip=calendar.judged_by_own_rule())
    for name in rules.skipped_:
        notices.append(f"column '{name}': MAD is zero, so the modified z-score rule is skipped there")
    hits = [numeric + timing for numeric, timing in zip(rules.hits(features), preparer.calendar_hits(table, view),
                                                        strict=True)]
    extras = _extras(table, options, notices, amount_numbers) if screens else {"screens": {}, "out_of_spec": None}
    within = None
    if options.within:
        within = peer_groups(table, options, _scan_segment, overall=results, combination=combination, kinds=kinds,
                             features=features, reference=original_reference,
                             reference_features=ref_features if reference is not None else None, notices=notices,
                             progress=progress)
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
        calendar=calendar.describe() if calendar.columns_ or calendar.duration_pairs_ else None,
        rule=combination.rule,
        flagged=int(combination.flagged.sum()),
        notices=tuple(notices),
        kinds=_kinds_record(kinds, results) if kinds is not None else None,
        reference=_reference_record(reference, ref_info) if reference is not None else None,
        approximations=approximations(n, n_ordinary, options, search, results),
        screens=extras["screens"] or None,
        structure=grouping.describe() if grouping is not None else None,
        map=MapRecord(mapped.method, dict(mapped.parameters), tuple(mapped.notices)) if mapped is not None else None,
        within=within.describe() if within is not None else None,
    )
    progress("done", 1.0)
    result = ScanResult(table, options, columns, features, preparer, search, graph, results, combination,
                        rules, hits, run, stability, reference=reference,
                        reference_features=ref_features if reference is not None else None,
                        out_of_spec=extras["out_of_spec"], groups=grouping, map=coords, kinds=kinds, within=within)
    if grouping is not None:
        from investigator.structure.cases import group_cases

        result.group_cases = group_cases(grouping, features, table.frame, combination.flagged, table.keys)
    return result


def _scan_segment(table: Table, options: ScanOptions, reference: Table | None,
                  kinds_from: np.ndarray | None) -> ScanResult:
    """One segment scanned as a table of its own (peer groups, pipeline/within.py)."""
    return run_scan(table, options, reference=reference, groups=False, screens=False, effort=SEGMENT,
                    kinds_from=kinds_from)


def _kinds_record(kinds: KindsOfNormal, results: dict[str, MethodResult]) -> KindsRecord:
    calibrated = {k: r.calibration for k, r in results.items() if r.calibration is not None}
    return KindsRecord(dict(kinds.parameters), kinds.sizes(),
                       {k: [float(sc.cutoff) for sc in c.scales] for k, c in calibrated.items()},
                       {k: [float(sc.far) for sc in c.scales] for k, c in calibrated.items()})


def _reference_record(reference: Table, info: dict) -> ReferenceRecord:
    return ReferenceRecord(InputRecord(**reference.source.as_dict(), rows=info["rows"]), int(reference.n_rows),
                           info["extra_columns"], info["missing_columns"], info["phase_i"], info["unseen_levels"])


def _kinds_of_normal(features: Features, results: dict, combination, options: ScanOptions,
                     notices: list[str], effort: Effort = FULL, candidates: np.ndarray | None = None):
    """Find the kinds of normal; with two or more, every method judges each record within its kind
    (robust_distance measures it against its kind's fit) and the combination is redone. ``candidates``: the
    kinds another scan gave these records, in place of HDBSCAN's."""
    columns = numeric_columns(features)
    kinds = find_kinds(features.values, columns, kinds_fitter(options, effort=effort), seed=options.seed,
                       notices=notices, candidates=candidates)
    if kinds is None:
        return None, results, combination
    results = apply_kinds(results, kinds, features.values)
    sizes = ", ".join(f"{s:,}" for s in kinds.sizes())
    notices.append(f"the records form {kinds.n_kinds} kinds of normal ({sizes} records); every record belongs "
                   "to the kind it is nearest to, and every method's cutoff is set within each kind")
    return kinds, results, combine_results(results, options)




def _reference_only_methods(options: ScanOptions, methods: list) -> list:
    """Hotelling T-squared is a reference-mode method; it uses the robust distance's features."""
    rd = next((m for m in methods if m.key == "robust_distance"), None)
    if rd is None:
        return []
    return [Hotelling(cutoff=options.cutoff, contamination=options.contamination, columns=rd.columns)]


def _unseen_levels(preparer: FeaturePreparer, table: Table, notices: list[str]) -> dict:
    out = {}
    for spec in preparer.specs_:
        if spec.role != "categorical":
            continue
        levels = preparer.column_values(table, spec.name).astype("string").fillna("(missing)")
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


def _amount_columns(table: Table, options: ScanOptions) -> dict[str, np.ndarray]:
    """The numbers of the columns the amount screens read (`digits`, `threshold`, `round`, once each in that
    order), checked before the scan starts: a missing column or one without numbers is an error."""
    named: dict[str, str] = {}  # column -> the option that names it first, for the message
    for parameter, columns in (("digits", options.digits or ()),
                               ("threshold", [t[0] for t in options.threshold or ()]),
                               ("round", options.round or ())):
        for col in columns:
            named.setdefault(col, parameter)
    numbers = {}
    for col, parameter in named.items():
        if col not in table.frame.columns:
            raise InputError(f"{table.name}: `{parameter}` names column '{col}', which is not in the file; "
                             f"columns are: {name_list(table.frame.columns)}", parameters=(parameter,))
        numbers[col] = values = column_numbers(table.frame[col])
        # Benford's law needs a nonzero amount (it reads leading digits); the other screens any number.
        usable = np.isfinite(values) & ((values != 0) if col in (options.digits or ()) else True)
        if not usable.any():
            what = "no nonzero numbers" if np.isfinite(values).any() else "no numbers"
            raise InputError(f"{table.name}: `{parameter}` names column '{col}', which holds {what}; name a "
                             "column of amounts", parameters=(parameter,))
    return numbers


def _extras(table: Table, options: ScanOptions, notices: list[str], numbers: dict[str, np.ndarray]) -> dict:
    """The trade's own screens (Benford, last two digits, round amounts, thresholds, duplicates) and
    specification limits, on the scanned records; ``numbers``: the amount columns (:func:`_amount_columns`)."""
    screens: dict = {}
    keys, rows = table.keys, table.row_numbers
    if options.digits:
        screens["benford"] = {}
        screens["last_two_digits"] = {}
        for col in options.digits:
            values = numbers[col]
            screens["benford"][col] = {
                "first_digit": benford_test(values, 1, name=col).as_dict(),
                "first_two_digits": benford_test(values, 2, name=col).as_dict(),
            }
            screens["last_two_digits"][col] = last_two_digits(values, name=col, keys=keys, rows=rows).as_dict()
    if numbers:  # every amount column: those of the digit tests, the thresholds and `round`
        screens["round_amounts"] = {col: round_amounts(values, name=col, keys=keys, rows=rows).as_dict()
                                    for col, values in numbers.items()}
    if options.threshold:
        screens["thresholds"] = [threshold_test(numbers[col], value, width, name=col, keys=keys, rows=rows).as_dict()
                                 for col, value, width in options.threshold]
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
        out_of_spec = spec_hits(table, load_limits(options.limits, table))
    return {"screens": screens, "out_of_spec": out_of_spec}


def _versions() -> dict:
    return {"investigator": __version__, "python": platform.python_version(), "numpy": np.__version__,
            "pandas": pandas.__version__, "scipy": scipy.__version__, "scikit-learn": sklearn.__version__}


def scan(data, *, progress: Progress = silent, store=None, on_load: Callable[[Table], None] | None = None,
         learn: bool = True, cache: bool | str = True, **options) -> ScanResult:
    """Scan a table (a path to CSV/TSV/Parquet/XLSX, or a pandas DataFrame) and return a ScanResult.

    Options are those of ``investigator scan``: ``id``, ``features``, ``exclude``, ``methods``, ``log``,
    ``cutoff``, ``contamination``, ``seed``, ``sheet``, ``decimal``, ``header_row``, ``exact``, ``resamples``,
    ``digits``, ``threshold``, ``round``, ``duplicates``, ``limits``, ``within`` (peer
    groups: also score every record against its segment, pipeline/within.py). When a review store exists (``store``, or
    ``<data>.investigation.sqlite`` beside a data file), each record also gets its current verdict and note, and, when
    some verdict says confirmed, follow-up or benign, a ``priority`` learned from them (``result.learning``,
    docs/learning.md; ``learn=False`` leaves it out). ``on_load``: called with the loaded table before any
    work on it (the commands check their output options there, so that a wrong column name costs no scan).
    ``cache``: reuse the kept result of the same scan of the same file when there is one, and keep this one
    (``False``: neither; ``"refresh"``: keep only; see :mod:`investigator.pipeline.scan_cache`). Raises
    :class:`InputError` on bad input.
    """
    opts = options.pop("options", None)
    if opts is None:
        opts = ScanOptions(**options)
    elif options:
        raise TypeError("give either options=ScanOptions(...) or keyword options, not both")
    kept = cache_entry(data, opts, cache)
    result = kept.load() if kept is not None else None
    if result is not None:
        if on_load is not None:
            on_load(result.table)
        progress("done", 1.0)
        return attach_verdicts(result, data, store, learn=learn)
    table = load_table(data, sheet=opts.sheet, id_column=opts.id, decimal=opts.decimal, header_row=opts.header_row)
    if on_load is not None:
        on_load(table)
    result = run_scan(table, opts, progress)
    if kept is not None:
        kept.save(result)
    return attach_verdicts(result, data, store, learn=learn)


def attach_verdicts(result: ScanResult, data, store=None, *, learn: bool = True) -> ScanResult:
    """Add the current verdict and note of each record when a review store exists (``store``, the one named
    for the data file, or the one of the same records under another name: review/stores.py); a store is only
    read here, never created. With ``learn`` and verdicts that say confirmed, follow-up or benign, also the
    priority learned from them (:func:`investigator.pipeline.priority.learn`)."""
    found = find_store(result.table, data, store)
    if found is None or (found.how != GIVEN and not found.exists):
        return result
    with ReviewStore(found.path, create=False) as review:
        matching = match_store(result.table, review)
    result.verdicts, result.notes = matching.verdicts(), matching.notes()
    notices = tuple(result.run.notices)
    if found.by_content:
        notices += (found.describe(result.table.name),)
    result.run = dataclasses.replace(result.run, review_store=str(found.path), notices=notices)
    if learn:
        attach_learning(result, matching)
    return result


def attach_learning(result: ScanResult, matching: Matching) -> ScanResult:
    """Set (or clear) ``result.learning`` and ``run.learning`` from the verdicts in ``matching``; reuses the
    evidence of an earlier learning of the same result (the workspace relearns after each verdict)."""
    result.learning = learn_priority(result, matching, result.learning)
    result.run = dataclasses.replace(result.run,
                                     learning=result.learning.describe() if result.learning is not None else None)
    return result


def check(data, *, reference, progress: Progress = silent, reference_sheet: str | None = None,
          store=None, on_load: Callable[[Table], None] | None = None, learn: bool = True,
          **options) -> ScanResult:
    """Score the records of ``data`` against a trusted ``reference`` table (paths or DataFrames).

    Preparation and every method are fitted on the reference only, after phase I cleaning (records the
    robust fit flags in the reference are excluded unless ``keep_reference_outliers=True``); the records of
    ``data`` are scored against it. Same options as :func:`scan`; the result has the same contract, with
    ``run.reference`` describing the reference; ``on_load`` is called with the loaded ``data`` as in :func:`scan`.
    """
    opts = options.pop("options", None)
    if opts is None:
        opts = ScanOptions(**options)
    elif options:
        raise TypeError("give either options=ScanOptions(...) or keyword options, not both")
    table, ref = check_tables(data, reference, opts, reference_sheet=reference_sheet)
    if on_load is not None:
        on_load(table)
    return attach_verdicts(run_scan(table, opts, progress, reference=ref), data, store, learn=learn)


def check_tables(data, reference, options: ScanOptions, *, reference_sheet: str | None = None) -> tuple[Table, Table]:
    """The new records and the reference of a check, read as :func:`check` reads them (the workspace's
    ``--reference`` too): the new records may be as few as one; ``run_scan(table, options, reference=ref)``
    scores them against the reference's fit."""
    # The decimal mark is the locale's, shared by both files; the reference's header is found on its own.
    ref = load_table(reference, sheet=reference_sheet, id_column=options.id, decimal=options.decimal)
    table = load_table(data, sheet=options.sheet, id_column=options.id, min_rows=1, decimal=options.decimal,
                       header_row=options.header_row)
    return table, ref
