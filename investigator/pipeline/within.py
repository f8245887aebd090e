"""Peer groups (``within``): every record scored against the records of its own segment as well as the whole table.

A segment is the records that share the values of the ``within`` columns (a vendor, an employee, a product line, a
machine; with two columns, each combination of their values). Each segment large enough is scanned as a table of its
own: the preparation (medians, spreads, log decisions, category rarities), every method, every cutoff, the kinds of
normal and the combination are fitted on that segment's records alone, exactly as a plain scan of the segment's rows
would fit them (with the shorter searches of ``scoring.SEGMENT``: the MCD from DetMCD's fixed starts alone, 25
trees; and one BLAS thread), and the ``within`` columns are not features there (they are constant in it). One step
is not searched again: the kinds of normal. A segment starts from the whole table's kinds (each record's kind as the
whole scan found it) in place of HDBSCAN's candidates, and keeps those with enough members in it that stay distinct
and pass the BIC test on its own records (structure/kinds.py); where the whole table is one kind of normal, so is
each segment. HDBSCAN on every segment took about a quarter of the segments' time (benchmarks/within_speed.py,
50,000 records in 40 segments: 19.7 s for the segments with it, 14.9 s without); the cost of not searching is that a
segment whose records form two kinds the whole table does not show is judged as one kind (wider cutoffs there). A
price ordinary for services can then stand out among stationery, though the whole table has many such prices.

This is peer group analysis: Bolton, R. J. & Hand, D. J. (2001), "Unsupervised profiling methods for fraud
detection", Credit Scoring and Credit Control VII, Edinburgh (reference from memory). There a record's peers are
the accounts that behaved most like it; here they are the records of a segment the user names, and a segment too
small to be judged on its own is judged against the segment most like it.

**The line.** A segment is fitted on its own when it has at least ``max(50, 10 x features)`` records (features:
those of the whole scan less the ``within`` columns'). The MCD needs well over p records (FastMCD's authors
advise n / p above 5, from memory), the neighbour methods need their k = 20 neighbours and a neighbourhood for
each of them, and every method's cutoff is the 0.975 quantile of the segment's own scores. Measured on invented
normal segments with a planted outlier (benchmarks/within_segment_size.py, 10 seeds): the Spearman correlation
between the consensus and the true Mahalanobis distance, which says how well a segment's own fit orders its
records, is 0.93 at 50 records with 3 features, 0.93 at 80 with 8 and 0.94 at 150 with 15 (10 per feature);
at 50 records it is 0.82 with 8 features and 0.80 with 15, at 30 records 0.78-0.86. Ordinary records flagged:
1.3% of 80 with 8 features, 0.7% of 150 with 15, 0.6% of 1,000.

**Segments below the line** are pooled: their records are scored against the fit of the segment with its own fit
that is nearest by the robust centre of the features, when their median record lies within that segment's bulk;
otherwise against the whole table (their within-segment view is then the overall one). Nearness is measured in each
candidate segment's own robust scale (the records prepared as that segment prepares its own, so a unit is one
robust standard deviation there): the Euclidean distance from the segment's coordinatewise median to the median of
the small segment's records, over the median distance of the segment's own records from its median. The nearest is
taken when that ratio is at most 1 (the small segment's median record is as close as half the segment's own
records). The whole table's robust scale would not do: it is set by the largest segment, and in it a segment of
prices around 6 and one around 120 can look alike beside one around 800 (measured on the invented invoices of
tests/pipeline/test_within.py). A notice names each, with its records, the line and where it was scored (the
first five one by one, then a count). A segment whose own scan cannot run (no feature varies in it) is pooled in
the same way, and the notice says why.

In ``check`` (a reference), segments are the reference's: a new record is scored against its segment's reference
records (phase I cleaning included, as ``check`` of that segment alone would do), and a value the reference lacks
or has too few records of is pooled in the same way, against the nearest segment or the whole reference.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from investigator.errors import InputError
from investigator.explain.explanation import WHOLE_TABLE, MethodScore, WithinSegment
from investigator.io.tables import Table, name_list
from investigator.methods.base import gaussian_scaling
from investigator.pipeline.combine import TOP_SHARE, Combination
from investigator.pipeline.options import ScanOptions
from investigator.pipeline.result import MethodResult, ScanResult
from investigator.pipeline.scoring import apply_kinds, combine_results
from investigator.prepare.features import Features
from investigator.progress import Progress, silent
from investigator.structure.kinds import KindsOfNormal

MIN_RECORDS = 50  # the least records a segment is fitted on (see the module's docstring)
PER_FEATURE = 10  # ... and at least this many per feature
MISSING = "(missing)"
NOTICES_LISTED = 5  # pooled segments named one by one; beyond, one notice counts the rest

# scan(table, options, reference, kinds) -> the result of an ordinary scan (the engine's run_scan, handed in so that
# this module and the engine do not import each other); kinds: the whole table's kind of each of the segment's
# records, or None (one kind).
SegmentScan = Callable[[Table, ScanOptions, Table | None, np.ndarray | None], ScanResult]


def segment_line(n_features: int) -> int:
    """The records a segment needs for a fit of its own."""
    return max(MIN_RECORDS, PER_FEATURE * n_features)


@dataclass(frozen=True)
class Segment:
    """One segment: its label ("vendor = V03"), its values, its records in the scan and in the fit (the
    reference's in a check), where it was scored (None: its own fit; another segment's label; or the whole
    table) and why, the notices of its own scan, and how many of its records are flagged within it."""

    label: str
    values: tuple[str, ...]
    records: int
    fit_records: int
    scored_against: str | None
    reason: str | None
    notices: tuple[str, ...]
    flagged: int
    flagged_within_only: int

    def as_dict(self) -> dict:
        return {"segment": self.label, "values": list(self.values), "records": self.records,
                "fit_records": self.fit_records, "scored_against": self.scored_against, "reason": self.reason,
                "flagged": self.flagged, "flagged_within_only": self.flagged_within_only,
                "notices": list(self.notices)}


@dataclass(frozen=True)
class WithinScores:
    """One method's within-segment view of every record: score, flag, z-value, the cutoff that applied and
    whether the z-value is far beyond (NaN / False where the method did not score the record)."""

    scores: np.ndarray
    flags: np.ndarray
    z: np.ndarray
    cutoffs: np.ndarray
    far_beyond: np.ndarray


@dataclass(eq=False)
class PeerGroups:
    """The within-segment view of a scan (``result.within``): per record its segment and the combination of the
    methods fitted on that segment (``consensus``, ``consensus_z``, ``votes``, ``flagged``, ``flag_reason``),
    per method key its :class:`WithinScores`, and each segment's own scan (``fits``, by segment index, with the
    positions of its records in ``positions``)."""

    columns: tuple[str, ...]
    min_records: int
    segments: tuple[Segment, ...]
    segment: np.ndarray  # per record: index into ``segments``
    methods: dict[str, WithinScores]
    consensus: np.ndarray
    consensus_z: np.ndarray
    votes: np.ndarray
    n_methods: np.ndarray  # per record: the voting methods of the fit it was scored by
    flagged: np.ndarray
    flag_reason: np.ndarray
    overall_flagged: np.ndarray
    fits: dict[int, ScanResult]
    positions: dict[int, np.ndarray]

    @property
    def within_only(self) -> np.ndarray:
        """Records flagged within their segment but not overall."""
        return self.flagged & ~self.overall_flagged

    def label(self, i: int) -> str:
        return self.segments[int(self.segment[i])].label

    def scored_against(self, i: int) -> str | None:
        return self.segments[int(self.segment[i])].scored_against

    def describe(self) -> dict:
        """The run record's ``within`` section."""
        return {"columns": list(self.columns), "min_records": self.min_records,
                "line": f"a segment is fitted on its own records from max({MIN_RECORDS}, {PER_FEATURE} x features) "
                        f"= {self.min_records} records",
                "segments": [s.as_dict() for s in self.segments],
                "flagged": int(self.flagged.sum()), "flagged_within_only": int(self.within_only.sum()),
                "flagged_overall_only": int((self.overall_flagged & ~self.flagged).sum())}

    def view(self, i: int) -> WithinSegment:
        """Record ``i`` (0-based) as its segment judges it; the features that stand out there come from the
        segment's own scan (none when it was scored against another fit)."""
        return self.views([i])[0]

    def views(self, positions) -> list[WithinSegment]:
        """:meth:`view` of the records at ``positions``, explained in one batch per segment."""
        positions = [int(i) for i in positions]
        top: dict[int, tuple] = {}
        for s in sorted({int(self.segment[i]) for i in positions}):
            fit = self.fits.get(s)
            if fit is None:
                continue
            mine = [i for i in positions if self.segment[i] == s]
            local = np.searchsorted(self.positions[s], mine)
            for i, e in zip(mine, fit.explainer.explain(local, peers=0), strict=True):
                top[i] = e.top_features
        out = []
        for i in positions:
            seg = self.segments[int(self.segment[i])]
            methods = {k: MethodScore(float(m.scores[i]), float(m.cutoffs[i]), bool(m.flags[i]), float(m.z[i]),
                                      bool(m.far_beyond[i]), float(gaussian_scaling(m.z[i])))
                       for k, m in self.methods.items() if np.isfinite(m.scores[i])}
            out.append(WithinSegment(segment=seg.label, records=seg.records, scored_against=seg.scored_against,
                                     reason=seg.reason, flagged=bool(self.flagged[i]), votes=int(self.votes[i]),
                                     methods_voting=int(self.n_methods[i]), consensus=float(self.consensus[i]),
                                     flag_reason=self.flag_reason[i] or None, method_scores=methods,
                                     top_features=top.get(i, ())))
        return out


def peer_groups(table: Table, options: ScanOptions, scan: SegmentScan, *, overall: dict[str, MethodResult],
                combination: Combination, features: Features, kinds: KindsOfNormal | None = None,
                reference: Table | None = None, reference_features: Features | None = None,
                notices: list[str] | None = None, progress: Progress = silent) -> PeerGroups:
    """The within-segment view of ``table`` (segments of ``options.within``); ``overall`` and ``combination``
    are the whole scan's (what a segment scored against the whole table keeps), ``features`` its prepared
    records (``reference_features`` the reference's, in a check; the line is set by their number), ``kinds`` its
    kinds of normal (None: one kind), which a segment's own scan starts from. ``scan`` scans one segment (the
    engine's own scan)."""
    columns = tuple(options.within or ())
    levels, fit_codes, codes = _segments(table, columns, reference)
    n_features = sum(1 for s in (reference_features or features).specs if s.name not in columns)
    line = segment_line(n_features)
    seg_options = _segment_options(options, columns)
    fit_counts = np.bincount(fit_codes, minlength=len(levels))
    counts = np.bincount(codes, minlength=len(levels))
    fits: dict[int, ScanResult] = {}  # by level: the segments scanned on their own
    failed: dict[int, str] = {}
    present = [s for s in range(len(levels)) if counts[s]]  # in a check, levels only the reference has are left out
    # The segments run inside the whole scan's one BLAS thread (pipeline/threads.py).
    for n, s in enumerate(present):
        progress(f"segments ({n + 1} of {len(present)})", 0.96 + 0.03 * n / max(len(present), 1))
        if fit_counts[s] < line:
            continue
        try:
            fit_rows = None if reference is None else reference.subset(fit_codes == s)
            carried = None if kinds is None else np.asarray(kinds.labels)[codes == s]
            fits[s] = scan(table.subset(codes == s), seg_options, fit_rows, carried)
        except InputError as error:  # e.g. no feature varies within the segment
            failed[s] = str(error)

    n = table.n_rows
    out = {k: WithinScores(np.full(n, np.nan), np.zeros(n, bool), np.full(n, np.nan), np.full(n, np.nan),
                           np.zeros(n, bool)) for k in overall}
    for k, r in overall.items():  # the whole table's view, kept where a segment is scored against it
        _put(out[k], slice(None), r.scores, r.flags, r.z, r.cutoffs, r.far_beyond)
    view = _View(np.asarray(combination.consensus, float).copy(), np.asarray(combination.z, float).copy(),
                 np.asarray(combination.votes).copy(), np.asarray(combination.flagged, bool).copy(),
                 np.asarray(combination.reason, dtype=object).copy(),
                 np.full(n, sum(1 for r in overall.values() if r.method.votes), dtype=int))
    index = np.full(len(levels), -1, dtype=int)
    index[present] = np.arange(len(present))
    positions: dict[int, np.ndarray] = {}
    own: dict[int, ScanResult] = {}
    segments: list[Segment] = []
    pooled: list[str] = []
    what = "reference records" if reference is not None else "records"
    for idx, s in enumerate(present):
        where = np.flatnonzero(codes == s)
        label = _label(columns, levels[s])
        against: str | None = None
        why = None
        seg_notices: tuple[str, ...] = ()
        if s in fits:
            own[idx], positions[idx] = fits[s], where
            seg_notices = tuple(fits[s].run.notices)
            _take(out, fits[s].method_results, where)
            view.put(where, fits[s].combination, fits[s].method_results)
        else:
            if s in failed:
                why = f"{fit_counts[s]:,} {what}, but its own scan cannot run ({failed[s]})"
            elif fit_counts[s] == 0:
                why = "no reference record has these values"
            else:
                why = f"{fit_counts[s]:,} {what}, fewer than the {line:,} a segment needs for its own fit"
            records = table.subset(codes == s)
            target = _nearest(records, fits)
            if target is not None:
                against = _label(columns, levels[target])
                results, scored = score_against(fits[target], records, options)
                _take(out, results, where)
                view.put(where, scored, results)
                where_text = (f"scored against segment {against}, the nearest to its median record (each segment "
                              "measured in its own robust scale)")
            else:
                against = WHOLE_TABLE
                where_text = ("scored against the whole table" + (", as its median record lies outside the bulk of "
                              "every segment with its own fit" if fits else ""))
            why = f"{why}; {where_text}"
            pooled.append(f"segment {label}: {why}")
        segments.append(Segment(label, tuple(str(v) for v in levels[s]), int(counts[s]), int(fit_counts[s]),
                                against, why, seg_notices, int(view.flagged[where].sum()),
                                int((view.flagged[where] & ~combination.flagged[where]).sum())))
    if notices is not None and not fits:
        largest = int(max(fit_counts[present], default=0))
        notices.append(f"within {', '.join(columns)}: none of the {len(present):,} segments could be fitted on its "
                       f"own (a fit needs {line:,} records; the largest segment has {largest:,}), so every record is "
                       "judged against the whole table and the within view is the overall one")
    elif notices is not None:
        notices += pooled[:NOTICES_LISTED]
        if len(pooled) > NOTICES_LISTED:
            notices.append(f"{len(pooled) - NOTICES_LISTED:,} more segments are below the line of {line:,} records or "
                           "cannot be scanned on their own; run.within.segments lists each and where it was scored")
    return PeerGroups(columns, line, tuple(segments), index[codes], out, view.consensus, view.consensus_z, view.votes,
                      view.n_voting, view.flagged, view.reason, np.asarray(combination.flagged, bool).copy(), own,
                      positions)


@dataclass
class _View:
    """The within-segment combination of every record, filled in segment by segment."""

    consensus: np.ndarray
    consensus_z: np.ndarray
    votes: np.ndarray
    flagged: np.ndarray
    reason: np.ndarray
    n_voting: np.ndarray

    def put(self, where: np.ndarray, c: Combination, results: dict[str, MethodResult]) -> None:
        self.consensus[where], self.consensus_z[where], self.votes[where] = c.consensus, c.z, c.votes
        self.flagged[where], self.reason[where] = c.flagged, c.reason
        self.n_voting[where] = sum(1 for r in results.values() if r.method.votes)


def check_within(table: Table, options: ScanOptions, reference: Table | None = None) -> None:
    """Raise :class:`InputError` when a ``within`` column is missing, the key, has one value only, or sets every
    record apart (in a check, the reference's values make the segments)."""
    _segments(table, tuple(options.within or ()), reference)


def _segments(table: Table, columns: tuple[str, ...], reference: Table | None):
    fit_table = reference if reference is not None else table
    fit_values = _segment_values(fit_table, columns, reference is not None)
    values = _segment_values(table, columns, False) if reference is not None else fit_values
    for j, name in enumerate(columns):
        if len(np.unique(fit_values[:, j].astype(str))) < 2:
            only = str(fit_values[0, j]) if len(fit_values) else MISSING
            raise InputError(f"{fit_table.name}: `within` column '{name}' has one value only ('{only}'), so it makes "
                             "no segments; name a column whose values set records apart (a vendor, a product line)",
                             parameters=("within",))
    levels, fit_codes, codes = _codes(fit_values, values)
    if len(np.unique(fit_codes)) == fit_table.n_rows:
        raise InputError(f"{fit_table.name}: `within` {_columns_text(columns)} ha{'s' if len(columns) == 1 else 've'} "
                         "a different value for every record, so no record has peers; name a column that groups "
                         "records (a vendor, a product line)", parameters=("within",))
    return levels, fit_codes, codes


def score_against(fit: ScanResult, table: Table, options: ScanOptions) -> tuple[dict[str, MethodResult],
                                                                                 Combination]:
    """The records of ``table`` (none of them part of ``fit``) scored by the methods, cutoffs and kinds fitted in
    ``fit``, as new records are: nothing of the fit changes."""
    features = fit.preparer.transform(table)
    X = features.values
    graph = fit.neighbors.query(X, same_table=False) if fit.neighbors is not None else None
    results: dict[str, MethodResult] = {}
    for key, r in fit.method_results.items():
        m = r.method
        scores = m.score(X, graph) if m.needs_neighbors else m.score(X)
        results[key] = dataclasses.replace(MethodResult.overall(m, scores), calibration=r.calibration)
    if fit.kinds is not None:
        kinds = dataclasses.replace(fit.kinds, labels=fit.kinds.assign(X))
        results = apply_kinds(results, kinds, X)
    combination = combine_results(results, options, by_rank=False, combined_far=fit.combination.combined_far)
    if options.contamination is not None and fit.flagged.any():
        # As a block of a dataset is judged: flagged when its evidence reaches that of the fit's flagged records.
        level = float(fit.combination.z[fit.flagged].min())
        hit = combination.z >= level
        combination = dataclasses.replace(combination, flagged=hit,
                                          reason=np.where(hit, TOP_SHARE, "").astype(object))
    return results, combination


def _put(target: WithinScores, where, scores, flags, z, cutoffs, far_beyond) -> None:
    target.scores[where], target.flags[where], target.z[where] = scores, flags, z
    target.cutoffs[where], target.far_beyond[where] = cutoffs, far_beyond


def _take(out: dict[str, WithinScores], results: dict[str, MethodResult], where: np.ndarray) -> None:
    """The per-method view of the records at ``where`` from ``results``; a method that did not run there
    leaves them NaN."""
    for k, target in out.items():
        r = results.get(k)
        if r is None:
            _put(target, where, np.nan, False, np.nan, np.nan, False)
        else:
            _put(target, where, r.scores, r.flags, r.z, r.cutoffs, r.far_beyond)


def _nearest(records: Table, fits: dict[int, ScanResult]) -> int | None:
    """The segment with its own fit whose centre is nearest the records' median, each measured in the segment's
    own robust scale (the records prepared as that segment prepares its own): the distance from the segment's
    median to the records' median over the median distance of the segment's own records from it. None unless
    the nearest is at most 1, where the records' median is as close as half the segment's own records."""
    best: tuple[float, int] | None = None
    for s, fit in fits.items():
        own = (fit.reference_features if fit.reference_features is not None else fit.features).values
        if not own.shape[1]:
            continue
        centre = np.median(own, axis=0)
        spread = float(np.median(np.linalg.norm(own - centre, axis=1)))
        gap = float(np.linalg.norm(np.median(fit.preparer.transform(records).values, axis=0) - centre))
        ratio = gap / spread if spread > 0 else (0.0 if gap == 0 else np.inf)
        if best is None or ratio < best[0]:
            best = (ratio, s)
    return best[1] if best is not None and best[0] <= 1.0 else None


def _segment_options(options: ScanOptions, columns: Sequence[str]) -> ScanOptions:
    """A segment's own scan: the same methods and cutoffs, without the within columns (constant in a segment)
    and without what reads the whole table (the map, resamples, the amount screens, limits)."""
    features = options.features
    if features is not None:
        features = tuple(f for f in features if f not in columns)
        if not features:
            raise InputError("`features` names only `within` columns, which are constant within each segment; "
                             "name other features too", parameters=("features", "within"))
    exclude = tuple(dict.fromkeys([*(options.exclude or ()), *columns]))
    return dataclasses.replace(options, within=None, map="none", resamples=0, digits=None, duplicates=None,
                               limits=None, threshold=None, round=None, features=features, exclude=exclude)


def _segment_values(table: Table, columns: Sequence[str], is_reference: bool) -> np.ndarray:
    """n x len(columns) text values of the within columns (integer codes without a decimal point, missing as
    "(missing)")."""
    frame = table.frame
    out = np.empty((table.n_rows, len(columns)), dtype=object)
    for j, name in enumerate(columns):
        if name not in frame.columns:
            what = "the reference" if is_reference else "the file"
            raise InputError(f"{table.name}: `within` names column '{name}', which is not in {what}; columns are: "
                             f"{name_list(list(frame.columns))}", parameters=("within",))
        if name == table.key_column:
            raise InputError(f"{table.name}: `within` column '{name}' is the `id` key, unique for every record; "
                             "name a column that groups records (a vendor, a product line)",
                             parameters=("within", "id"))
        out[:, j] = _texts(frame[name])
    return out


def _texts(column: pd.Series) -> np.ndarray:
    values = column.to_numpy(dtype=object)
    missing = pd.isna(column).to_numpy()
    out = np.empty(len(values), dtype=object)
    for i, v in enumerate(values):
        if missing[i]:
            out[i] = MISSING
        elif isinstance(v, float | np.floating) and float(v).is_integer():
            out[i] = str(int(v))  # an integer code read as a float (a column with gaps): 17, not 17.0
        else:
            out[i] = str(v)
    return out


def _codes(fit_values: np.ndarray, values: np.ndarray):
    """The distinct value combinations (sorted, so the segments' order does not depend on the rows') and each
    record's segment, for the fit's records and the scored ones (the same array in a plain scan)."""
    both = fit_values if values is fit_values else np.concatenate([fit_values, values])
    per_column = [np.unique(both[:, j].astype(str), return_inverse=True) for j in range(both.shape[1])]
    stacked = np.column_stack([inv.reshape(-1) for _, inv in per_column])
    combos, inverse = np.unique(stacked, axis=0, return_inverse=True)
    inverse = inverse.reshape(-1)
    levels = np.array([[per_column[j][0][c] for j, c in enumerate(row)] for row in combos], dtype=object)
    fit_codes = inverse[:len(fit_values)]
    codes = fit_codes if values is fit_values else inverse[len(fit_values):]
    return levels, fit_codes, codes


def _label(columns: Sequence[str], values) -> str:
    return ", ".join(f"{c} = {v}" for c, v in zip(columns, values, strict=True))


def _columns_text(columns: Sequence[str]) -> str:
    return " and ".join(f"column '{c}'" for c in columns)
