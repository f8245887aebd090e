"""The typed contracts: explanations, the run record and group cases.

Each type's ``to_dict()`` is what the JSON output holds (docs/output.md), so the checks here compare the
types with the files the scan writes, with the contract's own key lists, and with independent recomputation
from the result's arrays; the attributes are checked to carry the same values as the dicts.
"""

from __future__ import annotations

import dataclasses
import json
import re
import threading
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import investigator
from investigator.explain.explanation import Explanation, TopFeature, TypicalLevel, TypicalRange
from investigator.io.demo import DEMO_ID, write_demo
from investigator.io.writers import to_json_text
from investigator.output.explanation import explanation_text
from investigator.structure.profile import group_profile

pytestmark = pytest.mark.slow  # fits the demo several times (tens of seconds)

DOCS = Path(__file__).resolve().parents[2] / "docs"

# The explanation's keys, in order (docs/explanations.md and docs/output.md describe each).
EXPLANATION_KEYS = ["row", "key", "flagged", "votes", "flag_reason", "rank", "consensus", "consensus_z", "methods",
                    "contributions", "top_features", "column_hits", "peers", "nearest_ordinary", "stability",
                    "resamples", "cells"]
# Python names that differ from their JSON keys (a keyword, or a name kept for method keys).
RENAMED = {"method_scores": "methods", "source": "from", "before": "from", "after": "to", "method_fits": "methods"}


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("contracts")
    path = write_demo(folder)
    result = investigator.scan(str(path), id=DEMO_ID)
    doc = json.loads(result.write(folder / "scan.json").read_text(encoding="utf-8"))
    return result, doc


def _plain(value):
    """A value as the JSON file holds it (tuples become lists, NaN null)."""
    return json.loads(to_json_text({"v": value}))["v"]


def _same(obj, data) -> None:
    """Every field of the dataclass ``obj`` carries the value its dict form ``data`` holds under its key."""
    for f in dataclasses.fields(obj):
        value, key = getattr(obj, f.name), RENAMED.get(f.name, f.name)
        if value is None and key not in data:  # absent from the JSON when not set
            continue
        if f.name == "parameters" and key not in data:  # spread into the section (kinds, map)
            assert all(data[k] == v for k, v in value.items()), type(obj).__name__
            continue
        _same_value(value, data[key], f"{type(obj).__name__}.{f.name}")


def _same_value(value, data, where: str) -> None:
    if dataclasses.is_dataclass(value):
        if hasattr(value, "to_dict"):
            _same(value, data)
        else:  # the scan's own ColumnInfo / FeatureSpec: their as_dict is the JSON form
            assert value.as_dict() == data, where
    elif isinstance(value, tuple | list):
        assert len(value) == len(data), where
        for v, d in zip(value, data, strict=True):
            _same_value(v, d, where)
    elif isinstance(value, dict):
        assert list(value) == list(data), where
        for k in value:
            _same_value(value[k], data[k], f"{where}[{k}]")
    else:
        assert value == data, where


# -- the explanation ------------------------------------------------------------------------------------------


def test_the_flagged_records_explanations_are_what_the_json_records_hold(demo):
    result, doc = demo
    explained = result.explainer.flagged()
    assert sorted(explained) == np.flatnonzero(result.flagged).tolist()
    for i, e in explained.items():
        d = e.to_dict()
        assert list(d) == EXPLANATION_KEYS
        assert _plain(d) == d  # plain JSON values only: no tuples, no numpy numbers
        rec = doc["records"][i]
        assert rec["contributions"] == d["contributions"] and rec["top_features"] == d["top_features"]
        assert rec["peers"] == [{"row": p["row"], "key": p["key"]} for p in d["peers"]["records"]]
        assert rec["nearest_ordinary"] == d["nearest_ordinary"]
        assert rec["cells"] == d["cells"]
        assert rec["column_hits"] == d["column_hits"] and rec["flag_reason"] == d["flag_reason"]
        _same(e, d)


def test_an_explanation_read_by_attribute_matches_the_result_arrays(demo):
    # Independent of the explanation's own code: the result's arrays and the features as prepared.
    result, _ = demo
    i = int(result.ranking()[0])
    e = result.explain(result.keys[i])
    assert isinstance(e, Explanation)
    assert (e.row, e.key, e.rank, e.votes) == (i + 1, result.keys[i], 1, int(result.votes[i]))
    assert e.consensus == pytest.approx(result.consensus[i], abs=0) and e.flagged
    for key, m in e.method_scores.items():
        r = result.method_results[key]
        assert (m.score, m.cutoff, m.flag) == (float(r.scores[i]), float(r.cutoffs[i]), bool(r.flags[i]))
        assert e.flagged_by(key) == bool(r.flags[i])
    assert sum(e.flagged_by(k) for k in e.method_scores) == e.votes
    # Each top feature's typical range: the quartiles of the unflagged records' values (numpy), or their
    # commonest level (pandas); the value is the record's own as read.
    ordinary = ~result.flagged
    frame = result.table.frame
    for t in e.top_features:
        assert isinstance(t, TopFeature) and set(t.methods) <= set(result.method_results)
        column = frame[t.feature]
        if isinstance(t.typical, TypicalLevel):
            assert t.typical.level == column[ordinary].astype(str).value_counts().index[0]
            assert t.value == str(column.iloc[i])
        else:
            # Quartiles of the values as read (numpy, linear interpolation), over the unflagged records of
            # the record's own category when the range says it was computed on one.
            assert isinstance(t.typical, TypicalRange)
            j = result.features.names.index(t.feature)
            among = ordinary & ~result.features.imputed[:, j]
            if t.typical.group is not None:
                among &= frame[t.typical.group].astype(str).to_numpy() == t.typical.level
                assert t.typical.level == str(frame[t.typical.group].iloc[i])
            x = result.features.raw[among, j]
            assert (t.typical.q1, t.typical.median, t.typical.q3) == pytest.approx(
                tuple(np.quantile(x, [0.25, 0.5, 0.75])), rel=1e-12)
            assert t.typical.records == len(x)
            assert t.value is None if t.imputed else t.value == result.features.raw[i, j]
    text = explanation_text(e)
    assert f"Record {e.key}" in text and e.top_features[0].feature in text
    with pytest.raises(dataclasses.FrozenInstanceError):
        e.rank = 2


# -- the run record -------------------------------------------------------------------------------------------


def _documented_run_keys() -> set[str]:
    """The keys of the ``run`` table in docs/output.md."""
    text = (DOCS / "output.md").read_text(encoding="utf-8")
    table = text[text.index("`run`, the run record:"):text.index("`records`, one per record")]
    return set(re.findall(r"^\| `(\w+)` \|", table, flags=re.M))


def test_the_run_record_is_the_jsons_run_and_only_documented_keys(demo):
    result, doc = demo
    run = result.run
    d = run.to_dict()
    assert _plain(d) == doc["run"]
    assert set(d) <= _documented_run_keys()
    _same(run, d)
    # Read by attribute, against the table itself.
    assert run.input.rows == result.n_records and run.input.key == DEMO_ID
    assert run.flagged == int(result.flagged.sum())
    assert run.methods == list(result.method_results) == list(d["methods"])
    # Every input column, then (with ``source``) the calendar parts and durations computed from date columns.
    assert [c.name for c in run.columns if not c.source] == list(result.table.frame.columns)
    assert [c.name for c in run.columns if c.source] == [s.name for s in run.features if ": " in s.name]
    assert [s.name for s in run.features] == result.features.names
    # The demo has two kinds of normal: the record holds each kind's cutoff of every method's calibration.
    assert run.kinds is not None and len(run.kinds.sizes) == result.kinds.n_kinds == 2
    for key, r in result.method_results.items():
        assert run.kinds.cutoffs[key] == [s.cutoff for s in r.calibration.scales]
    assert run.rule in result.summary()


def test_the_run_record_does_not_change_with_the_scans_objects(demo):
    result, _ = demo
    before = result.run.to_dict()
    column = result.columns[0]
    reason = column.reason
    try:
        column.reason = "changed afterwards"
        assert result.run.to_dict() == before
    finally:
        column.reason = reason
    with pytest.raises(dataclasses.FrozenInstanceError):
        result.run.flagged = 0
    stored = dataclasses.replace(result.run, review_store="store.sqlite").to_dict()
    assert list(stored)[-1] == "review_store" and {k: v for k, v in stored.items() if k != "review_store"} == before


def test_a_checks_reference_section_reads_by_attribute():
    rng = np.random.default_rng(31)
    ref = pd.DataFrame(rng.normal(size=(300, 3)), columns=list("abc"))
    ref.loc[:3] += 12  # four records the robust fit leaves out (phase I)
    new = pd.DataFrame(rng.normal(size=(20, 3)), columns=list("abc"))
    result = investigator.check(new, reference=ref)
    reference = result.run.reference
    assert {r.row for r in reference.phase_i.records} >= {1, 2, 3, 4}
    assert reference.used == 300 - reference.phase_i.excluded and reference.input.rows == 300
    d = result.run.to_dict()
    assert "kinds" not in d and "structure" not in d
    _same(reference, d["reference"])


# -- group cases ----------------------------------------------------------------------------------------------


def test_group_cases_are_the_jsons_groups_and_match_the_grouping(demo):
    result, doc = demo
    cases = result.group_cases
    assert cases and [g.to_dict() for g in cases] == doc["groups"]
    for case, d in zip(cases, doc["groups"], strict=True):
        assert list(d) == ["group", "size", "members", "flagged", "profile"]
        _same(case, d)
        members = result.groups.members(case.group)
        assert [m.row for m in case.members] == (members + 1).tolist() and case.size == len(members)
        assert case.keys == [result.keys[i] for i in members]
        assert case.flagged == int(result.flagged[members].sum())
        mask = np.zeros(result.n_records, dtype=bool)
        mask[members] = True
        assert list(case.profile) == group_profile(mask, result.features, result.table.frame)


# -- the explainer --------------------------------------------------------------------------------------------


def test_the_explainer_builds_each_part_once_whichever_thread_asks_first(demo):
    result, _ = demo
    explainer = type(result.explainer)(result)  # a fresh one: nothing built yet
    start = threading.Barrier(4)

    def ask(_):
        start.wait()
        return explainer.pool, explainer.typical, explainer.flagged()

    with ThreadPoolExecutor(4) as pool:
        answers = list(pool.map(ask, range(4)))
    for part in range(3):
        assert all(a[part] is answers[0][part] for a in answers)
    assert explainer.flagged()[next(iter(explainer.flagged()))].to_dict() == \
        result.explainer.flagged()[next(iter(result.explainer.flagged()))].to_dict()
    with pytest.raises(TypeError):  # shared by every reader: read-only
        explainer.flagged()[0] = None


def test_a_fitted_model_hands_its_peers_to_the_blocks_it_scores():
    from investigator.io.tables import Source, Table
    from investigator.pipeline.scan_model import ScanModel

    rng = np.random.default_rng(32)
    frame = pd.DataFrame(rng.normal(size=(600, 3)), columns=list("abc"))
    frame.loc[5] = [9.0, -9.0, 9.0]
    sample = Table(frame, Source(None, "dataframe"), None, [], np.arange(600) + 1)
    model = ScanModel.fit(sample, investigator.ScanOptions())
    block = model.score(frame.iloc[:50], 0)
    assert block.explainer.pool is model.pool and block.explainer.typical is model.typical
    assert block.run is model.run
    e = block.explain(row=6)
    assert e.flagged and e.peers.source == "sample" and 6 not in {p.row for p in e.peers.records}
