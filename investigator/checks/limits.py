"""Specification limits: rule breaches, reported apart from the statistical flags.

A limits file is a CSV with the columns ``column``, ``lower`` and ``upper`` (either limit may be empty).
A record is out of specification on a column when its value is below ``lower`` or above ``upper``. Out of
spec is a breach of a rule the user set; unusual is a statistical finding; the output keeps them apart
(``out_of_spec`` per record, never a vote).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from investigator.errors import InputError
from investigator.io.tables import Table, name_list
from investigator.prepare.features import column_numbers


@dataclass(frozen=True)
class Limit:
    column: str
    lower: float | None
    upper: float | None


def load_limits(path, table: Table) -> list[Limit]:
    path = Path(path)
    if not path.exists():
        raise InputError(f"limits={path}: no such file; give a CSV with columns column, lower, upper",
                         parameters=("limits",))
    try:
        frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise InputError(f"limits={path}: not a readable CSV ({type(exc).__name__}); "
                         "give a CSV with columns column, lower, upper", parameters=("limits",)) from None
    frame.columns = [c.strip().lower() for c in frame.columns]
    if not {"column", "lower", "upper"} <= set(frame.columns):
        raise InputError(f"limits={path}: needs the columns column, lower, upper; it has "
                         f"{name_list(frame.columns)}", parameters=("limits",))
    limits = []
    for n, row in enumerate(frame.itertuples(index=False), 2):
        name = row.column.strip()
        if name not in table.frame.columns:
            raise InputError(f"limits={path} line {n}: column '{name}' is not in {table.name}; columns are: "
                             f"{name_list(table.frame.columns)}", parameters=("limits",))
        bounds = []
        for label, text in (("lower", row.lower), ("upper", row.upper)):
            text = text.strip()
            try:
                bounds.append(float(text) if text else None)
            except ValueError:
                raise InputError(f"limits={path} line {n}: {label} limit '{text}' is not a number",
                                 parameters=("limits",)) from None
        lower, upper = bounds
        if lower is None and upper is None:
            raise InputError(f"limits={path} line {n}: column '{name}' has neither a lower nor an upper limit",
                             parameters=("limits",))
        if lower is not None and upper is not None and lower > upper:
            raise InputError(f"limits={path} line {n}: lower limit {lower:g} is above upper limit {upper:g}",
                             parameters=("limits",))
        limits.append(Limit(name, lower, upper))
    return limits


def spec_hits(table: Table, limits: list[Limit]) -> list[list[dict]]:
    """Per record, a list of {column, value, lower, upper, side} for each limit it breaks."""
    out: list[list[dict]] = [[] for _ in range(table.n_rows)]
    for lim in limits:
        x = column_numbers(table.frame[lim.column])
        with np.errstate(invalid="ignore"):
            low = x < lim.lower if lim.lower is not None else np.zeros(len(x), dtype=bool)
            high = x > lim.upper if lim.upper is not None else np.zeros(len(x), dtype=bool)
        for i in np.flatnonzero(low | high):
            out[i].append({"column": lim.column, "value": float(x[i]), "lower": lim.lower, "upper": lim.upper,
                           "side": "below" if low[i] else "above"})
    return out
