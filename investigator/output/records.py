"""A scan result as records: one dict per record (the JSON's ``records``), one row per record (CSV, Parquet),
the whole JSON document, and writing them to a file. The contract is docs/output.md.

This layer works on the result it is given (``ScanResult``, which hands its ``record()``, ``to_frame()``,
``to_dict()`` and ``write()`` on to here); it never builds one.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from investigator.errors import InputError
from investigator.explain.cells import cells_text
from investigator.explain.explanation import Explanation
from investigator.io.json_text import clean, float_column, json_bytes, light_clean
from investigator.io.output_files import atomic_output, check_not_input
from investigator.io.writers import check_out_path, safe_frame
from investigator.output.columns import choose_columns, filter_frame, input_frame
from investigator.output.where import Condition, parse_where, where_mask
from investigator.prepare.roles import DATE

if TYPE_CHECKING:
    from investigator.pipeline.result import ScanResult


def record(result: ScanResult, i: int, explained: Explanation | None = None) -> dict:
    """The record at 0-based position ``i``; ``explained``: its explanation when flagged (default: the
    explainer's)."""
    if explained is None:
        explained = result.explainer.flagged().get(i)
    names = result.features.names
    results = result.method_results
    extra: dict[str, object] = {
        "contributions": explained.contributions_dict() if explained else None,
        "top_features": [t.to_dict() for t in explained.top_features] if explained else None,
        "peers": [{"row": p.row, "key": p.key} for p in explained.peers.records] if explained else None,
        "nearest_ordinary": explained.nearest_ordinary.to_dict()
        if explained and explained.nearest_ordinary is not None else None,
    }
    found = result.cells.findings().get(i)
    extra["cells"] = [c.to_dict() for c in found] if found is not None else None
    if result.stability is not None:
        extra["stability"] = _num(result.stability[i])
    if result.out_of_spec is not None:
        extra["out_of_spec"] = result.out_of_spec[i]
    if result.verdicts is not None:
        extra["verdict"] = result.verdicts[i]
        extra["note"] = result.notes[i] if result.notes is not None else None
    if result.learning is not None:  # learned from verdicts: beside the consensus, never instead of it
        learned = result.learning
        extra.update(priority=_num(learned.priority[i]), review_order=int(learned.review_order[i]) or None,
                     priority_reason=learned.reason[i] or None)
    if result.groups is not None:
        g = result.groups.record(i)
        extra.update(pattern=g["pattern"], group=g["group"], group_size=g["group_size"])
    if result.map is not None:
        extra["map"] = [float(result.map[i, 0]), float(result.map[i, 1])]
    if result.kinds is not None:
        extra["kind"] = int(result.kinds.labels[i]) + 1
    if result.within is not None:  # peer groups: the record as its own segment judges it
        w = result.within
        extra.update(segment=w.label(i), within_consensus=_num(w.consensus[i]), within_flagged=bool(w.flagged[i]),
                     within_scores={k: _num(m.scores[i]) for k, m in w.methods.items()},
                     within_scored_against=w.scored_against(i))
    return {
        "row": int(result.table.row_numbers[i]),
        "key": result.keys[i],
        "scores": {k: _num(r.scores[i]) for k, r in results.items()},
        "flags": {k: bool(r.flags[i]) for k, r in results.items()},
        "rank": int(result.rank[i]),
        "consensus": _num(result.consensus[i]),
        "consensus_z": _num(result.consensus_z[i]),
        "votes": int(result.votes[i]),
        "flagged": bool(result.flagged[i]),
        "flag_reason": result.flag_reason[i] or None,
        "column_hits": result.column_hits[i],
        "imputed": [names[j] for j in np.flatnonzero(result.features.imputed[i])],
        **extra,
    }


def records(result: ScanResult) -> list[dict]:
    """Every record as :func:`record` gives it, built column by column (:func:`columnwise_records`)."""
    return columnwise_records(result)


EXPLAINED = ("contributions", "top_features", "peers", "nearest_ordinary")  # None unless flagged


def columnwise_records(result: ScanResult, *, for_json: bool = False) -> list[dict]:
    """The records of :func:`record`, built from the result's arrays a column at a time (a field's values for
    every record at once) instead of record by record; flagged records, which carry their explanation, come
    from :func:`record` itself. A field :func:`record` has and this builder does not know yet takes its values
    from :func:`record` of every record (correct, at the old speed), so new fields flow through. ``for_json``:
    values as :func:`investigator.io.json_text.json_bytes` writes them (``clean``)."""
    n = result.n_records
    if n == 0:
        return []
    explained = result.explainer.flagged()
    number = float_column if for_json else _num_column
    tidy = clean if for_json else (lambda v: v)
    fields = list(record(result, 0, explained.get(0)))  # every record has the same fields, in this order
    columns: dict[str, list] = {
        "row": np.asarray(result.table.row_numbers).astype(np.int64).tolist(),
        "key": [tidy(k) for k in result.keys],
        "rank": np.asarray(result.rank).astype(np.int64).tolist(),
        "consensus": number(result.consensus),
        "consensus_z": number(result.consensus_z),
        "votes": np.asarray(result.votes).astype(np.int64).tolist(),
        "flagged": np.asarray(result.flagged, dtype=bool).tolist(),
        "flag_reason": [r or None for r in result.flag_reason.tolist()],
        "column_hits": [tidy(h) for h in result.column_hits],
    }
    methods = list(result.method_results)
    scores = [number(r.scores) for r in result.method_results.values()]
    flags = [np.asarray(r.flags, dtype=bool).tolist() for r in result.method_results.values()]
    columns["scores"] = [dict(zip(methods, v, strict=True)) for v in zip(*scores, strict=True)]
    columns["flags"] = [dict(zip(methods, v, strict=True)) for v in zip(*flags, strict=True)]
    names = result.features.names
    imputed = np.asarray(result.features.imputed)
    columns["imputed"] = [[] for _ in range(n)]
    for i in np.flatnonzero(imputed.any(axis=1)).tolist():
        columns["imputed"][i] = [names[j] for j in np.flatnonzero(imputed[i])]
    found = result.cells.findings()
    columns["cells"] = [tidy([c.to_dict() for c in found[i]]) if i in found else None for i in range(n)]
    if result.stability is not None:
        columns["stability"] = number(result.stability)
    if result.out_of_spec is not None:
        columns["out_of_spec"] = [tidy(h) for h in result.out_of_spec]
    if result.verdicts is not None:
        columns["verdict"] = list(result.verdicts)
        columns["note"] = list(result.notes) if result.notes is not None else [None] * n
    if result.groups is not None:
        grouped = [result.groups.record(i) for i in range(n)]
        for part in ("pattern", "group", "group_size"):
            columns[part] = [tidy(g[part]) for g in grouped]
    if result.map is not None:
        x, y = number(result.map[:, 0]), number(result.map[:, 1])
        columns["map"] = [[a, b] for a, b in zip(x, y, strict=True)]
    if result.kinds is not None:
        columns["kind"] = (np.asarray(result.kinds.labels).astype(np.int64) + 1).tolist()
    for name in EXPLAINED:
        columns[name] = [None] * n
    unknown = [f for f in fields if f not in columns]
    if unknown:
        full = [record(result, i, explained.get(i)) for i in range(n)]
        for f in unknown:
            columns[f] = [tidy(r[f]) for r in full]
    out = [dict(zip(fields, values, strict=True)) for values in zip(*(columns[f] for f in fields), strict=True)]
    for i, explanation in explained.items():
        whole = record(result, i, explanation)
        out[i] = light_clean(whole) if for_json else whole
    return out


def _num_column(values) -> list:
    """Floats with NaN and infinities as None (:func:`_num` for a whole column)."""
    a = np.asarray(values, dtype=float)
    out = a.tolist()
    for i in np.flatnonzero(~np.isfinite(a)).tolist():
        out[i] = None
    return out


def to_frame(result: ScanResult, columns: Sequence[str] | str | None = None) -> pd.DataFrame:
    """One row per record: row, key, rank, consensus, consensus_z, votes, flagged, flag_reason,
    score_<method>, flag_<method>, ..., then the input columns (``columns``: all when None, none when empty,
    or those named; see :mod:`investigator.output.columns`)."""
    frame = result_frame(result)
    inputs = input_frame(result.table, columns)
    return pd.concat([frame, inputs], axis=1) if len(inputs.columns) else frame


def result_frame(result: ScanResult) -> pd.DataFrame:
    """The result columns of :func:`to_frame`, without the input columns."""
    results = result.method_results
    out = {
        "row": result.table.row_numbers,
        "key": result.keys,
        "rank": result.rank,
        "consensus": result.consensus,
        "consensus_z": result.consensus_z,
        "votes": result.votes,
        "flagged": result.flagged,
        "flag_reason": list(result.flag_reason),
    }
    for k, r in results.items():
        out[f"score_{k}"] = r.scores
    for k, r in results.items():
        out[f"flag_{k}"] = r.flags
    # Most records have no hit and nothing imputed: those are "" without a join (a million records: 4.5 s less).
    out["column_hits"] = ["; ".join(f"{h['column']}: {h['rule']}" for h in hits) if hits else ""
                          for hits in result.column_hits]
    imputed = result.features.imputed
    names = result.features.names
    texts_imputed = [""] * len(imputed)
    for i in np.flatnonzero(imputed.any(axis=1)) if imputed.ndim == 2 and imputed.shape[1] else ():
        texts_imputed[i] = "; ".join(names[j] for j in np.flatnonzero(imputed[i]))
    out["imputed"] = texts_imputed
    flagged = np.flatnonzero(result.flagged)
    texts = np.full(result.n_records, "", dtype=object)
    texts[flagged] = result.explainer.top_features_texts(flagged)
    out["top_features"] = texts
    found = result.cells.findings()
    out["cells"] = [cells_text(found[i]) if i in found else "" for i in range(result.n_records)]
    if result.stability is not None:
        out["stability"] = result.stability
    if result.out_of_spec is not None:
        out["out_of_spec"] = ["; ".join(f"{h['column']} {h['side']} limit" for h in hits)
                              for hits in result.out_of_spec]
    if result.verdicts is not None:
        out["verdict"], out["note"] = result.verdicts, result.notes
    if result.learning is not None:  # review_order: a nullable integer, empty for records with a verdict
        learned = result.learning
        out["priority"] = learned.priority
        order = np.asarray(learned.review_order, dtype=np.int64)
        out["review_order"] = pd.arrays.IntegerArray(order, order == 0)
        out["priority_reason"] = list(learned.reason)
    if result.map is not None:
        out["map_x"], out["map_y"] = result.map[:, 0], result.map[:, 1]
    if result.kinds is not None:  # the kind of normal (large cluster) a record belongs to: a nullable integer
        out["kind"] = pd.array(np.asarray(result.kinds.labels) + 1, dtype="Int64")
    if result.groups is not None:
        out["pattern"] = list(result.groups.pattern)
        small = result.groups.small_group  # small groups only, a nullable integer (empty where none)
        out["group"] = pd.arrays.IntegerArray(small.astype(np.int64), small <= 0)
    if result.within is not None:
        w = result.within
        out["segment"] = np.array([s.label for s in w.segments], dtype=object)[w.segment]
        out["within_consensus"], out["within_flagged"] = w.consensus, w.flagged
        for k, m in w.methods.items():
            out[f"within_score_{k}"] = m.scores
        out["within_scored_against"] = np.array([s.scored_against for s in w.segments], dtype=object)[w.segment]
    return pd.DataFrame(out)


def to_dict(result: ScanResult, *, for_json: bool = False) -> dict:
    """The JSON document: ``run``, ``records`` and, in a scan, ``groups`` (every part of the run record and
    every group as their ``to_dict()`` gives them). ``for_json``: values as
    :func:`investigator.io.json_text.json_bytes` writes them."""
    tidy = light_clean if for_json else (lambda v: v)
    out = {"run": tidy(result.run.to_dict()), "records": columnwise_records(result, for_json=for_json)}
    if result.group_cases is not None:
        out["groups"] = tidy([g.to_dict() for g in result.group_cases])
    return out


def write_result(result: ScanResult, path: Path, *, columns: Sequence[str] | str | None = None,
                 where: str | None = None) -> Path:
    """Write ``result`` to ``path``; the format follows the extension (.json, .csv, .parquet). ``columns``: the
    input columns of a .csv or .parquet result (all by default; empty for none; a .json result holds none);
    ``where``: an SQL WHERE condition on the CSV's columns (every input column included): only the records it
    holds for are written (:mod:`investigator.output.where`)."""
    check_out_path(path)
    check_not_input(path, result_inputs(result), parameter="path")
    suffix = path.suffix.lower()
    if suffix == ".json" and columns is not None:
        raise InputError(f"path={path}: `columns` chooses the input columns of a .csv or .parquet result; a .json "
                         "result holds none (leave `columns` out, or write .csv)", parameters=("path", "columns"))
    condition = parse_where(where) if where is not None else None  # a bad condition stops before any work
    if condition is not None:
        choose_columns(result.table, columns)  # so does an unknown column
    keep = where_positions(result, condition) if condition is not None else None
    with atomic_output(path, parameter="path") as tmp:  # never a half-written output under the real name
        if suffix == ".json":
            document = to_dict(result, for_json=True)
            if keep is not None:
                document["records"] = [document["records"][i] for i in keep]
            tmp.write_bytes(json_bytes(document, cleaned=True))
        else:
            frame = to_frame(result, columns)
            if keep is not None:
                frame = frame.iloc[keep].reset_index(drop=True)
            if suffix == ".csv":
                safe_frame(_key_as_text(frame)).to_csv(tmp, index=False, lineterminator="\n")
            else:
                _key_as_text(frame).to_parquet(tmp, index=False)
    return path


def where_positions(result: ScanResult, condition: str | Condition) -> np.ndarray:
    """The 0-based positions of the records for which ``condition`` (an SQL WHERE condition on the CSV's
    columns, every input column included; the scan's date columns compared as dates) holds."""
    frame = filter_frame(to_frame(result), result.table, date_columns(result), result.options.dayfirst)
    return np.flatnonzero(where_mask(frame, condition))


def date_columns(result: ScanResult) -> list[str]:
    """The input columns the scan found (or was told) to hold dates."""
    return [c.name for c in result.columns if c.role == DATE and not c.source]


def result_inputs(result: ScanResult) -> list[tuple[str, str | None]]:
    """The files a scan read, none of which an output may replace: the data, the reference, the limits file
    and the review store."""
    run = result.run
    return [("data file", result.table.source.path),
            ("reference file", run.reference.input.path if run.reference is not None else None),
            ("limits file", result.options.limits),
            ("review store", run.review_store)]


def _key_as_text(frame: pd.DataFrame) -> pd.DataFrame:
    # Keys can mix numbers and text; one type per column keeps CSV and Parquet readers consistent.
    if not pd.api.types.is_integer_dtype(frame["key"]):
        frame = frame.assign(key=frame["key"].astype(str))
    return frame


def _num(x) -> float | None:
    x = float(x)
    return x if np.isfinite(x) else None
