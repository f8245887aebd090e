"""The priority learned from verdicts on the scan's path (investigator/pipeline/priority.py): present only with
verdicts, flags and consensus unchanged, the store only read, a known benign pattern lowered with its reason,
``--no-learn`` and ``learn=False``, verdicts for records not in the data, and data like users' data (integer
codes, many exact copies, clusters of unequal size).

The tables are invented (a workshop's gauge readings with a batch of calibration runs; fixtures/messy.py).
"""

from __future__ import annotations

import hashlib
import json
import sqlite3
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from fixtures import messy
from investigator import scan
from investigator.io.tables import load_table
from investigator.review.learning import PRIORITY_BOUND, VERDICT_BOUND, logit
from investigator.review.matching import record_case
from investigator.review.store import ReviewStore, default_store_path
from investigator.review.verdicts import record_verdict

pytestmark = pytest.mark.slow  # each test scans a table of 600 to 1,800 records, some twice

KEY = "reading"


def readings(n: int = 600, batch: int = 12, seed: int = 21) -> pd.DataFrame:
    """Gauge readings; the last ``batch`` are calibration runs: far from production and close together."""
    rng = np.random.default_rng(seed)
    load = rng.normal(50, 10, n)
    frame = pd.DataFrame({"load_kn": load, "strain": 2 * load + rng.normal(0, 2, n),
                          "temperature": rng.normal(21, 2, n), "runtime_s": rng.gamma(9, 2, n)})
    frame.iloc[n - batch:] = np.column_stack([rng.normal(130, 1.0, batch), rng.normal(262, 2.0, batch),
                                              rng.normal(21, 0.5, batch), rng.normal(95, 1.0, batch)])
    frame = frame.round(2)
    frame.insert(0, KEY, [f"GR-{40000 + i}" for i in range(n)])
    return frame


@pytest.fixture
def data(tmp_path) -> Path:
    path = tmp_path / "readings.csv"
    readings().to_csv(path, index=False)
    return path


def mark(path: Path, keys: list[str], state: str, id_column: str | None = KEY) -> None:
    table = load_table(path, id_column=id_column)
    index = {str(k): i for i, k in enumerate(table.keys)}
    for key in keys:
        record_verdict(table, index[key], state, None, default_store_path(path))


def store_state(path: Path) -> tuple[str, list]:
    store = default_store_path(path)
    with sqlite3.connect(store) as db:
        rows = db.execute("SELECT * FROM history ORDER BY change").fetchall()
    return hashlib.sha256(store.read_bytes()).hexdigest(), rows


def test_without_verdicts_there_is_no_priority_anywhere(data, tmp_path):
    result = scan(data, id=KEY)
    assert result.learning is None and result.run.learning is None
    assert "priority" not in result.to_frame().columns
    assert "priority" not in result.to_dict()["records"][0] and "learning" not in result.to_dict()["run"]
    assert "Review next" not in result.summary()
    mark(data, ["GR-40003"], "open")  # open is no label: still nothing learned
    assert scan(data, id=KEY).learning is None


def test_a_benign_pattern_is_lowered_and_says_why(data):
    plain = scan(data, id=KEY)
    batch = [f"GR-{40000 + i}" for i in range(588, 600)]
    mark(data, batch[:3], "benign")
    result = scan(data, id=KEY)
    learned = result.learning
    assert learned is not None
    rest = [result.position(key=k) for k in batch[3:]]
    others = np.setdiff1d(np.arange(result.n_records), [result.position(key=k) for k in batch])
    assert (learned.likeness.count[rest] >= 2).all()  # like two or all three of the benign calibration runs
    assert (learned.likeness.count[rest] == 3).sum() >= 6
    assert (learned.likeness.count[others] == 0).all()  # production readings are like none of them
    assert (learned.priority[rest] < result.consensus[rest]).all()
    for i in rest:
        others_text = "1 other" if learned.likeness.count[i] == 2 else "2 others"
        assert "like GR-405" in learned.reason[i] and f"and {others_text} marked benign" in learned.reason[i]
        assert learned.reason[i].startswith("down ")
    # A record lowered less than those above it moves up; its reason says so rather than reading as if the
    # (negative) weights listed had raised it.
    passed_by = [i for i in range(result.n_records) if learned.moved[i] > 0 and learned.shift[i] < 0]
    assert passed_by  # the production readings under the lowered calibration runs
    for i in passed_by:
        assert learned.reason[i].startswith("up ") and "(others above it were lowered more)" in learned.reason[i]
    # The unsupervised result is the same with and without verdicts.
    assert np.array_equal(result.consensus, plain.consensus) and np.array_equal(result.flagged, plain.flagged)
    assert np.array_equal(result.rank, plain.rank)
    # The calibration runs come later in the review order than in the consensus order.
    consensus_place = np.argsort(np.argsort(-result.consensus_z, kind="stable"))
    assert np.mean(learned.review_order[rest]) > np.mean(consensus_place[rest] + 1)


def test_scoring_only_reads_the_store(data):
    mark(data, ["GR-40599", "GR-40598"], "benign")
    mark(data, ["GR-40010"], "confirmed")
    before = store_state(data)
    files = sorted(p.name for p in data.parent.iterdir())
    result = scan(data, id=KEY)
    result.write(data.parent / "out.json")
    assert result.learning is not None
    assert store_state(data) == before
    assert sorted(p.name for p in data.parent.iterdir() if p.name != "out.json") == files


def test_one_verdict_stays_within_the_bound_on_the_scan(data):
    plain = scan(data, id=KEY)
    top = plain.keys[int(plain.ranking()[0])]
    mark(data, [str(top)], "benign")
    result = scan(data, id=KEY)
    p, c = result.learning.priority, result.consensus
    assert np.abs(p - c).max() <= PRIORITY_BOUND
    assert np.abs(logit(p) - logit(c)).max() <= VERDICT_BOUND + 1e-9
    assert result.run.learning["verdicts"] == 1 and result.run.learning["benign"] == 1


def test_outputs_carry_the_priority_beside_the_consensus(data, tmp_path, cli):
    mark(data, ["GR-40599"], "benign")
    mark(data, ["GR-40001"], "follow-up")
    out = tmp_path / "scan.csv"
    code, text, err = cli("scan", data, "--id", KEY, "--out", out)
    assert code == 0, err
    frame = pd.read_csv(out)
    assert {"priority", "review_order", "priority_reason"} <= set(frame.columns)
    assert frame.loc[frame["key"] == "GR-40599", "review_order"].isna().all()  # reviewed: no place
    todo = frame["review_order"].dropna().astype(int)
    assert sorted(todo) == list(range(1, len(frame) - 1))
    assert "Review next (priority learned from 2 verdicts" in text
    js = tmp_path / "scan.json"
    assert cli("scan", data, "--id", KEY, "--out", js)[0] == 0
    document = json.loads(js.read_text(encoding="utf-8"))
    learning = document["run"]["learning"]
    assert learning["verdicts"] == 2 and learning["matters"] == 1 and learning["benign"] == 1
    assert "baseline" in learning["weights"] and learning["penalty"] >= 1.0
    record = document["records"][0]
    assert 0 < record["priority"] < 1 and "review_order" in record
    parquet = tmp_path / "scan.parquet"
    assert cli("scan", data, "--id", KEY, "--out", parquet)[0] == 0
    assert pd.read_parquet(parquet)["review_order"].dtype == "Int64"


def test_no_learn_leaves_the_priority_out(data, tmp_path, cli):
    mark(data, ["GR-40599"], "benign")
    out = tmp_path / "scan.csv"
    code, text, err = cli("scan", data, "--id", KEY, "--out", out, "--no-learn")
    assert code == 0, err
    frame = pd.read_csv(out)
    assert "priority" not in frame.columns and "verdict" in frame.columns
    assert "Review next" not in text
    result = scan(data, id=KEY, learn=False)
    assert result.learning is None and result.verdicts is not None


def test_verdicts_for_records_not_in_the_data_are_left_out_and_counted(data, tmp_path):
    other = tmp_path / "other" / "readings.csv"
    other.parent.mkdir()
    frame = readings()
    frame[KEY] = frame[KEY].str.replace("GR-", "OLD-")
    frame.to_csv(other, index=False)
    mark(other, ["OLD-40599", "OLD-40001"], "benign")
    store = default_store_path(other)
    result = scan(data, id=KEY, store=store)  # this store's verdicts are all on keys this data does not have
    assert result.learning is None and all(v is None for v in result.verdicts)
    mark(data, ["GR-40599"], "benign")  # the data's own store: one known, then add an unknown one by hand
    own = default_store_path(data)
    table = load_table(other, id_column=KEY)
    with ReviewStore(own) as review:
        review.set(record_case(table, 5), "confirmed")
    result = scan(data, id=KEY)
    assert result.run.learning["verdicts"] == 1 and result.run.learning["verdicts_not_in_the_data"] == 1


def test_integer_codes(tmp_path):
    frame, labels = messy.ratings(n=800)
    path = tmp_path / "survey.csv"
    frame.to_csv(path, index=False)
    planted = frame["sheet"][labels == 1].tolist()
    mark(path, planted[:2], "confirmed", id_column="sheet")
    result = scan(path, id="sheet")
    learned = result.learning
    assert learned is not None and np.isfinite(learned.priority).all()
    assert ((learned.priority > 0) & (learned.priority < 1)).all()
    rest = [result.position(key=k) for k in planted[2:]]
    assert (learned.review_order[rest] <= 5).all()  # the other impossible sheets come first


def test_many_exact_copies_share_a_priority_and_one_verdict_covers_them(tmp_path):
    frame, _ = messy.copies_and_one_outlier(n=600)
    path = tmp_path / "copies.csv"
    frame.to_csv(path, index=False)
    mark(path, ["1"], "benign", id_column=None)  # row 1 is one of 180 identical records: no key, by content
    result = scan(path)
    learned = result.learning
    copies = np.flatnonzero((frame[["a", "b", "c"]].to_numpy() == [0.1, -0.2, 0.3]).all(axis=1))
    assert len(copies) == 180
    assert (learned.review_order[copies] == 0).all()  # all reviewed by the one verdict
    assert np.unique(learned.priority[copies]).size == 1
    assert result.run.learning["verdicts"] == 1 and result.run.learning["records"] == 180
    assert np.abs(learned.priority - result.consensus).max() <= PRIORITY_BOUND  # one verdict, 180 records


def test_clusters_of_unequal_size(tmp_path):
    frame, _ = messy.gaussian_clusters(sizes=(1500, 300), p=4)
    frame.insert(0, "id", [f"K{i}" for i in range(len(frame))])
    path = tmp_path / "clusters.csv"
    frame.to_csv(path, index=False)
    plain = scan(path, id="id")
    top = [str(plain.keys[int(i)]) for i in plain.ranking()[:4]]
    mark(path, top[:2], "benign", id_column="id")
    mark(path, top[2:], "confirmed", id_column="id")
    result = scan(path, id="id")
    learned = result.learning
    assert learned is not None and np.isfinite(learned.shift).all()
    assert np.array_equal(result.flagged, plain.flagged)
    assert sorted(learned.review_order[learned.review_order > 0]) == list(range(1, len(frame) - 3))


def test_the_report_and_its_cases_table_show_the_review_order(data, tmp_path, cli):
    mark(data, ["GR-40599", "GR-40598"], "benign")
    html = tmp_path / "report.html"
    code, _, err = cli("report", data, "--id", KEY, "--out", html)
    assert code == 0, err
    text = html.read_text(encoding="utf-8")
    assert 'id="next"' in text and "What to review next" in text and "Learned from 2 verdicts" in text
    assert '<td class="num">1</td>' in text.split('id="next"')[1]  # the first place of the review order
    table = tmp_path / "cases.csv"
    assert cli("report", data, "--id", KEY, "--out", table)[0] == 0
    cases = pd.read_csv(table)
    assert {"priority", "review_order", "priority_reason"} <= set(cases.columns)
    # The rest of the calibration batch is flagged, so in the table, lowered with its reason.
    assert cases["priority_reason"].fillna("").str.contains("like GR-4059").sum() >= 8
    assert cli("report", data, "--id", KEY, "--out", tmp_path / "plain.csv", "--no-learn")[0] == 0
    assert "priority" not in pd.read_csv(tmp_path / "plain.csv").columns
