"""Column roles: which columns are features, and why the others are left out.

Roles: ``numeric`` and ``categorical`` are features; ``key`` (the --id column), ``identifier`` (unique or
near-unique text, monotone integer counters), ``date``, ``text`` (free or high-cardinality text) and ``empty``
(no values) are excluded. ``--features`` and ``--exclude`` override the inference.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import asdict, dataclass

import numpy as np
import pandas as pd

from investigator.errors import InputError
from investigator.io.numbers import leading_zero_codes
from investigator.io.tables import Table, name_list

NUMERIC = "numeric"
CATEGORICAL = "categorical"
FEATURE_ROLES = (NUMERIC, CATEGORICAL)
KEY, IDENTIFIER, DATE, TEXT, EMPTY = "key", "identifier", "date", "text", "empty"

# A text column is categorical when it has few distinct values: at most 50, and at most one per five
# records (so a 20-row file cannot have 15 "categories").
MAX_LEVELS = 50
# Share of non-missing cells that must parse for a text column to count as numbers or dates.
PARSE_SHARE = 0.95
# Text with at least this many distinct values per non-missing cell is identifier-like.
NEAR_UNIQUE = 0.9
_DATE_LIKE = re.compile(r"^\s*(\d{1,4}[-/.]\d{1,2}[-/.]\d{1,4}|\d{4}-\d{2}-\d{2}T)")


@dataclass
class ColumnInfo:
    """What the scan decided about one column, and why (shown to the user and kept in the run record)."""

    name: str
    role: str
    dtype: str
    missing: int
    distinct: int
    reason: str
    source: str = ""  # a calendar part or duration: the date column(s) it comes from

    @property
    def is_feature(self) -> bool:
        return self.role in FEATURE_ROLES

    def as_dict(self) -> dict:
        out = asdict(self)
        if not self.source:
            out.pop("source")
        return out


def parse_numeric(values: pd.Series) -> pd.Series:
    """Text to numbers where possible (thousands separators and spaces removed); others become NaN."""
    if pd.api.types.is_numeric_dtype(values) and not pd.api.types.is_bool_dtype(values):
        return values.astype("float64")
    text = values.astype("string").str.strip().str.replace(r"(?<=\d)[,_ ](?=\d{3}\b)", "", regex=True)
    return pd.to_numeric(text, errors="coerce").astype("float64")


def infer_column(name: str, values: pd.Series) -> ColumnInfo:
    """The role of one column from its values alone."""
    n = len(values)
    present = values.dropna()
    missing = n - len(present)
    dtype = str(values.dtype)
    if len(present) == 0:
        return ColumnInfo(name, EMPTY, dtype, missing, 0, "no values")
    if pd.api.types.is_float_dtype(values) and not np.isfinite(present.to_numpy(dtype=float)).any():
        return ColumnInfo(name, EMPTY, dtype, missing, 0, "no values (only infinite ones)")
    distinct = int(present.nunique())
    info = ColumnInfo(name, NUMERIC, dtype, missing, distinct, "")
    if pd.api.types.is_bool_dtype(values):
        info.role, info.reason = CATEGORICAL, "true/false values"
    elif pd.api.types.is_datetime64_any_dtype(values):
        info.role, info.reason = DATE, "dates"
    elif pd.api.types.is_timedelta64_dtype(values):
        info.role, info.reason = TEXT, "time spans (left out; a duration between two date columns is a feature "\
            "with --durations)"
    elif pd.api.types.is_numeric_dtype(values):
        _numeric_role(info, present)
    else:
        _text_role(info, present.astype(str))
    return info


def _numeric_role(info: ColumnInfo, present: pd.Series) -> None:
    as_float = present.astype("float64")
    finite = as_float[np.isfinite(as_float)]
    integral = len(finite) and bool(np.all(np.mod(finite, 1) == 0))
    # A counter: unique whole numbers, in increasing order, with few gaps (range at most twice the count).
    if (
        integral
        and info.distinct == len(present)
        and len(present) >= 3
        and present.is_monotonic_increasing
        and float(finite.max() - finite.min()) <= 2 * (len(present) - 1)
    ):
        info.role, info.reason = IDENTIFIER, "a counter: unique whole numbers in increasing order"
    else:
        info.reason = "numbers"


def _text_role(info: ColumnInfo, present: pd.Series) -> None:
    sample = present.iloc[: min(len(present), 2000)]
    numeric = parse_numeric(sample)
    # Codes written with leading zeros (00123) parse, but are identifiers or categories, not amounts.
    if numeric.notna().mean() >= PARSE_SHARE and not leading_zero_codes(sample):
        bad = len(sample) - int(numeric.notna().sum())
        info.role = NUMERIC
        info.reason = "numbers written as text" + (f" ({bad} cells do not parse)" if bad else "")
        return
    if sample.str.match(_DATE_LIKE).mean() >= PARSE_SHARE:
        parsed = pd.to_datetime(sample, errors="coerce", format="mixed")
        if parsed.notna().mean() >= PARSE_SHARE:
            info.role, info.reason = DATE, "dates"
            return
    m = len(present)
    words = sample.str.split().str.len().median()
    if words >= 3:
        info.role, info.reason = TEXT, "free text"
    elif info.distinct <= min(MAX_LEVELS, max(2, m // 5)):
        info.role, info.reason = CATEGORICAL, f"{info.distinct} distinct values"
    elif info.distinct >= NEAR_UNIQUE * m:
        info.role, info.reason = IDENTIFIER, "unique or near-unique text"
    else:
        info.role, info.reason = TEXT, f"text with {info.distinct} distinct values (too many categories)"


def assign_roles(
    table: Table, features: Sequence[str] | None = None, exclude: Sequence[str] | None = None
) -> list[ColumnInfo]:
    """Roles for every column of ``table``, with ``features``/``exclude`` applied on top of the inference."""
    columns = list(table.frame.columns)
    for parameter, names in (("features", features), ("exclude", exclude)):
        unknown = [c for c in names or [] if c not in columns]
        if unknown:
            raise InputError(
                f"{table.name}: `{parameter}` names column '{unknown[0]}', which is not in the file; "
                f"columns are: {name_list(columns)}", parameters=(parameter,)
            )
    if table.key_column is not None and table.key_column in (features or []):
        raise InputError(
            f"{table.name}: column '{table.key_column}' is the `id` key and cannot also be a feature",
            parameters=("id",),
        )
    infos = []
    for name in columns:
        info = infer_column(name, table.frame[name])
        if name == table.key_column:
            info.role, info.reason = KEY, "the record key (--id)"
        elif features is not None:
            if name in features:
                _force_feature(info, table)
            elif info.is_feature:
                info.role, info.reason = "excluded", "not named in --features"
        if exclude and name in exclude:
            info.role, info.reason = "excluded", "named in --exclude"
        infos.append(info)
    return infos


def _force_feature(info: ColumnInfo, table: Table) -> None:
    if info.role == EMPTY:
        raise InputError(
            f"{table.name}: `features` names column '{info.name}', which has no values; drop it from "
            "`features`", parameters=("features",)
        )
    if info.is_feature:
        info.reason += "; named in --features"
        return
    values = table.frame[info.name]
    if info.role == DATE:
        info.reason = "dates (named in --features)"
    elif parse_numeric(values.dropna()).notna().mean() >= PARSE_SHARE:
        info.role, info.reason = NUMERIC, "numbers; named in --features"
    else:
        info.role, info.reason = CATEGORICAL, f"{info.distinct} distinct values; named in --features"
