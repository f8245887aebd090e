"""The cases of a report: the flagged records ranked by consensus, then any other record with a verdict,
each with its explanation and verdict; and the same as rows of a table for a spreadsheet."""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from investigator.explain.explanation import Explanation, NearestOrdinary
from investigator.explain.view import top_features_text
from investigator.output.columns import filter_frame, input_frame, written
from investigator.output.explanation import cell_sentence, column_hit_text, format_value
from investigator.output.records import date_columns
from investigator.output.where import where_mask


@dataclass
class Case:
    rank: int | None     # the case number: among the flagged records by rank (1 = the most unusual); None if
    #                      not flagged. The scan's own rank among all records is record["rank"].
    position: int        # 0-based
    record: dict         # result.record(position): scores, flags, column hits, ... (and kind/pattern/group if any)
    explanation: Explanation
    match: object | None  # the verdict in force (review.matching.RecordMatch), or None

    @property
    def anchor(self) -> str:
        """The id of the case's block in the HTML report."""
        return f"case-{self.rank}" if self.rank is not None else f"record-{self.position + 1}"


def flagged_positions(result) -> list[int]:
    return [int(i) for i in result.ranking() if result.flagged[i]]


def build_cases(result, review, limit: int | None = None) -> list[Case]:
    """The first ``limit`` flagged records by consensus, then every other record with a verdict (flagged ones
    beyond the limit first, all by consensus): a verdict is part of the record of the investigation."""
    flagged = flagged_positions(result)
    rank = {i: n for n, i in enumerate(flagged, 1)}
    judged = set(review.matching.matches) if review.matching is not None else set()
    top = flagged if limit is None else flagged[:limit]
    beyond = [i for i in flagged[len(top):] if i in judged]
    others = [int(i) for i in result.ranking() if int(i) in judged and not result.flagged[i]]
    explained = dict(result.explainer.flagged()) if top or beyond else {}
    if others:  # explained on request: the explainer keeps the flagged records' only
        explained.update(zip(others, result.explainer.explain(others), strict=True))
    return [Case(rank.get(i), i, result.record(i), explained[i], review.match(i)) for i in top + beyond + others]


# -- text for table cells ------------------------------------------------------------------------------------


def column_hits_text(hits: list[dict]) -> str:
    """E.g. "amount: boxplot_fence (2,403 is above 180.5)"."""
    return "; ".join(column_hit_text(h) for h in hits)


def nearest_text(nearest: NearestOrdinary | None) -> str:
    """E.g. "amount 240.3 instead of 2,403 (robust distance 60.5 -> 11.1, cutoff 11.14)"."""
    if not nearest:
        return ""
    change = " and ".join(f"{c.feature} {format_value(c.after)} instead of {format_value(c.before)}"
                          for c in nearest.changes)
    reach = "" if nearest.reaches_cutoff else "; the closest found within the ordinary range: not under it"
    return (f"{change} (robust distance {nearest.distance_before:.1f} -> {nearest.distance_after:.1f}, "
            f"cutoff {nearest.cutoff:.2f}{reach})")


def cells_text(explanation: Explanation) -> str:
    """The cells that look wrong, each in words, e.g. "amount 3,855 where this record's other values predict
    about 38.55 (residual 41.2): a factor of 100 too high: a misplaced decimal point?"."""
    return " ".join(cell_sentence(c) for c in explanation.cells)


def top_text(explanation: Explanation, limit: int = 5) -> str:
    return top_features_text(explanation, limit=limit)


def table_rows(result, cases: list[Case], columns=None) -> tuple[list[str], list[list]]:
    """The cases table: headers and one row per case (numbers as numbers, text as text), the result columns
    first, then the record's input columns (``columns``: all by default, empty for none, or those named)."""
    headers, rows = result_rows(result, cases)
    inputs = input_frame(result.table, columns)
    if not len(inputs.columns):
        return headers, rows
    at = [c.position for c in cases]
    values = [_cells(inputs[name].iloc[at]) for name in inputs.columns]
    return headers + list(inputs.columns), [row + [v[n] for v in values] for n, row in enumerate(rows)]


def filter_cases(result, cases: list[Case], where) -> list[Case]:
    """The cases for which the SQL WHERE condition ``where`` holds, on the cases table's columns (every input
    column included; the scan's date columns compared as dates)."""
    headers, rows = result_rows(result, cases)
    at = [c.position for c in cases]
    own = pd.DataFrame({h: written(pd.Series([r[j] for r in rows], dtype=object)) for j, h in enumerate(headers)},
                       index=range(len(cases)))
    inputs = input_frame(result.table).iloc[at].reset_index(drop=True)
    frame = filter_frame(pd.concat([own, inputs], axis=1), result.table, date_columns(result),
                         result.options.dayfirst, positions=at)
    keep = where_mask(frame, where)
    return [c for c, k in zip(cases, keep, strict=True) if k]


def result_rows(result, cases: list[Case]) -> tuple[list[str], list[list]]:
    """The result columns of the cases table: headers and one row per case."""
    methods = list(result.method_results)
    extra = [k for k in ("stability", "kind", "pattern", "group", "priority", "review_order", "priority_reason")
             if any(k in c.record for c in cases)]
    headers = (["case", "rank", "row", "key", "consensus", "consensus_z", "votes", "flagged", "flag_reason"]
               + [f"flag_{k}" for k in methods]
               + ["cells", "top_features", "column_hits", "nearest_ordinary_change"] + extra
               + ["verdict", "note", "reviewer", "verdict_at", "changed_since_verdict"])
    rows = []
    for c in cases:
        r, m = c.record, c.match
        entry = m.entry if m is not None else None
        rows.append(
            [c.rank, r["rank"], r["row"], _plain(r["key"]), r["consensus"], r["consensus_z"], r["votes"], r["flagged"],
             r["flag_reason"]]
            + [r["flags"][k] for k in methods]
            + [cells_text(c.explanation), top_text(c.explanation), column_hits_text(r["column_hits"]),
               nearest_text(c.explanation.nearest_ordinary)]
            + [_plain(r.get(k)) for k in extra]
            + [entry.verdict if entry else None, entry.note if entry else None,
               entry.reviewer if entry else None, entry.at if entry else None,
               (m.changed if m is not None else None)]
        )
    return headers, rows


def _cells(values: pd.Series) -> list:
    """One input column's cells as a spreadsheet takes them: missing as empty, numpy scalars as Python values,
    dates as dates (with their times where the column has any; with a time zone as ISO text)."""
    if pd.api.types.is_datetime64_any_dtype(values.dtype):
        stamps = values
        if getattr(stamps.dt, "tz", None) is not None:
            return [None if pd.isna(v) else v.isoformat() for v in stamps]
        timed = bool((stamps.dropna() != stamps.dropna().dt.normalize()).any())
        return [None if pd.isna(v) else v.to_pydatetime() if timed else v.date() for v in stamps]
    return [None if _missing(v) else _plain(v) for v in values.tolist()]


def _missing(value) -> bool:
    try:
        return bool(pd.isna(value))
    except (TypeError, ValueError):
        return False


def _plain(value):
    """A cell value as a spreadsheet takes it: numpy scalars to Python, lists to text."""
    if hasattr(value, "item") and not isinstance(value, str):
        value = value.item()
    if isinstance(value, list | tuple | dict):
        return str(value)
    return value
