"""Reference mode: check that new records fit the reference's columns, and clean the reference (phase I).

Phase I: before anything is fitted, the robust fit (robust_distance, the reweighted MCD) runs on the reference
alone; the reference records it flags are listed and left out, so a contaminated history does not widen the
limits new records are judged by. ``--keep-reference-outliers`` lists them but keeps them.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from investigator.errors import InputError
from investigator.io.tables import Table, name_list
from investigator.methods.robust_distance import RobustDistance
from investigator.pipeline.options import ScanOptions
from investigator.pipeline.run_record import PhaseOneRecord, RecordRef
from investigator.prepare.features import FeaturePreparer, column_numbers
from investigator.prepare.roles import NUMERIC, ColumnInfo


def check_columns(table: Table, reference: Table, columns: list[ColumnInfo], notices: list[str]) -> dict:
    """Refuse new records that lack a reference feature or hold text where the reference has numbers."""
    new_cols = set(table.frame.columns)
    ref_cols = list(reference.frame.columns)
    # A calendar part or duration is computed from its date columns: those must be there.
    features = [c for c in columns if c.is_feature and not c.source]
    needed = [c.name for c in features] + [s for c in columns if c.is_feature and c.source
                                           for s in c.source.split(", ")]
    missing = list(dict.fromkeys(name for name in needed if name not in new_cols))
    if missing:
        raise InputError(
            f"{table.name}: lacks column '{missing[0]}', a feature of the reference {reference.name}"
            + (f" (and {len(missing) - 1} more)" if len(missing) > 1 else "")
            + f"; add it, or leave it out of both with exclude={','.join(missing)}",
            parameters=("exclude",),
        )
    for info in features:
        if info.role != NUMERIC:
            continue
        values = table.frame[info.name]
        present = values.notna().to_numpy()
        parsed = np.isfinite(column_numbers(values)) | np.isinf(column_numbers(values))
        bad = np.flatnonzero(present & ~parsed)
        if present.sum() and len(bad) > 0.5 * present.sum():
            raise InputError(
                f"{table.name}: column '{info.name}' holds numbers in the reference but text here (row "
                f"{bad[0] + 1}: '{values.iloc[bad[0]]}'); fix the column or leave it out with `exclude`",
                parameters=("exclude",),
            )
    extra = [c for c in table.frame.columns if c not in set(ref_cols)]
    if extra:
        notices.append(f"{table.name} has columns the reference does not, left out: {name_list(extra)}")
    absent = [c for c in ref_cols if c not in new_cols and c not in {f.name for f in features}]
    if absent:
        notices.append(f"{table.name} lacks reference columns that are not features: {name_list(absent)}")
    return {"rows": reference.n_rows, "extra_columns": extra, "missing_columns": absent}


def clean_reference(reference: Table, preparer: FeaturePreparer, options: ScanOptions,
                    notices: list[str]) -> tuple[Table, PhaseOneRecord]:
    """Phase I: the reference records the robust fit flags, listed, and left out unless asked to keep them."""
    features = preparer.transform(reference)
    use = [j for j, s in enumerate(features.specs) if s.role == NUMERIC]
    if not use or len(reference.frame) <= len(use) + 1:
        notices.append("reference: phase I cleaning skipped (no feature the robust fit can use)")
        return reference, PhaseOneRecord("robust_distance", 0, ())
    # The chi-square cutoff, not raised for heavy tails: a flag here only keeps a record out of the fit.
    rd = RobustDistance(cutoff=options.cutoff, seed=options.seed, columns=np.array(use),
                        adapt_cutoff=False).fit(features.values)
    flags = rd.flags(rd.reference_scores_)
    keys, rows = reference.keys, reference.row_numbers
    flagged = tuple(RecordRef(int(rows[i]), keys[i]) for i in np.flatnonzero(flags))
    info = PhaseOneRecord("robust_distance", 0, flagged, float(rd.cutoff_))
    if not flags.any():
        return reference, info
    shown = ", ".join(str(r.key) for r in flagged[:8])
    more = f" and {flags.sum() - 8} more" if flags.sum() > 8 else ""
    if options.keep_reference_outliers:
        notices.append(f"reference: {flags.sum()} records the robust fit flags are kept "
                       f"(--keep-reference-outliers): {shown}{more}")
        return reference, info
    notices.append(f"reference: {flags.sum()} of {len(flags)} records the robust fit flags are left out "
                   f"before fitting (phase I): {shown}{more}")
    return reference.subset(~flags), dataclasses.replace(info, excluded=int(flags.sum()))
