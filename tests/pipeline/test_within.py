"""Peer groups (``within``): every record scored against its own segment as well as the whole table.

The data are invented invoice lines of a fictional facilities firm, shaped like a ledger: a text category of very
unequal sizes (2,000 / 300 / 300 / 40 / 8 lines), integer cost-centre codes, prices to the cent, quantities,
amounts = price x quantity, 20 exact copies of services lines (all values but the invoice number) and the rows
in shuffled order. One stationery line is priced at 900.00, an ordinary price for services and travel lines;
travel has as many lines as stationery, so the category's rarity (all the whole scan knows of it) cannot tell
the two apart, and the line is not flagged overall.

References outside the code under test: a plain scan of each segment's rows alone (the within view must be
exactly it), scikit-learn's LocalOutlierFactor and SciPy's cdist on a segment's prepared features (as
tests/methods/test_neighbor_methods.py compares the methods on a whole table), the project's scan model (the
Dask path's scoring of new records, a separate code path) for a pooled segment, and direct numpy computations
written out here.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import cdist
from sklearn.neighbors import LocalOutlierFactor

import investigator
from fixtures.cli import assert_one_line_error
from investigator.errors import InputError
from investigator.io.tables import load_table
from investigator.output.explanation import explanation_text
from investigator.pipeline.dask_engine import check_dask_options
from investigator.pipeline.engine import run_scan
from investigator.pipeline.options import ScanOptions
from investigator.pipeline.scan_model import ScanModel
from investigator.pipeline.scoring import SEGMENT
from investigator.pipeline.within import MIN_RECORDS, PER_FEATURE, segment_line

pytestmark = pytest.mark.slow  # scans every segment of a 2,669-line table several times (a minute or more)

SEED = 7
SIZES = {"services": 2000, "travel": 300, "stationery": 300, "hardware": 40, "catering": 8}
# Unit price: median and spread of its logarithm per category (invented).
PRICE = {"services": (800, 0.35), "travel": (900, 0.3), "stationery": (6, 0.4), "hardware": (120, 0.3),
         "catering": (45, 0.25)}
PLANTED = "INV-09999"


def invoice_lines(seed: int = 3) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    parts = []
    for category, n in SIZES.items():
        centre, spread = PRICE[category]
        quantity = rng.integers(5, 60, n) if category == "stationery" else rng.integers(1, 6, n)
        parts.append(pd.DataFrame({"category": category, "cost_centre": rng.choice([110, 120, 130, 140], n),
                                   "unit_price": np.round(rng.lognormal(np.log(centre), spread, n), 2),
                                   "quantity": quantity}))
    lines = pd.concat(parts, ignore_index=True)
    lines["amount"] = np.round(lines["unit_price"] * lines["quantity"], 2)
    planted = pd.DataFrame({"category": ["stationery"], "cost_centre": [120], "unit_price": [900.0],
                            "quantity": [1], "amount": [900.0]})
    copies = lines[lines["category"] == "services"].sample(20, random_state=seed)  # keyed twice
    lines = pd.concat([lines, planted, copies], ignore_index=True)
    lines.insert(0, "invoice", [f"INV-{i:05d}" for i in range(len(lines))])
    lines.loc[len(lines) - 21, "invoice"] = PLANTED
    return lines.sample(frac=1, random_state=seed).reset_index(drop=True)


@pytest.fixture(scope="module")
def lines() -> pd.DataFrame:
    return invoice_lines()


@pytest.fixture(scope="module")
def within(lines):
    return investigator.scan(lines, id="invoice", within="category", seed=SEED)


@pytest.fixture(scope="module")
def plain(lines):
    return investigator.scan(lines, id="invoice", seed=SEED)


def _position(frame: pd.DataFrame, key: str) -> int:
    return int(np.flatnonzero(frame["invoice"].to_numpy() == key)[0])


def _robust_z(x: np.ndarray, value: float) -> float:
    """(value - median) / (1.4826 MAD), written out with numpy (the MAD's normal consistency constant)."""
    median = np.median(x)
    return float((value - median) / (1.4826 * np.median(np.abs(x - median))))


# -- the within-segment outlier ------------------------------------------------------------------------------


def test_a_price_ordinary_for_services_is_flagged_among_stationery_and_not_overall(lines, within, plain):
    i = _position(lines, PLANTED)
    # The data as designed, by a direct computation: 900.00 is an ordinary services price (log scale), far out
    # among stationery prices.
    log_price = np.log(lines["unit_price"].to_numpy())
    category = lines["category"].to_numpy()
    assert abs(_robust_z(log_price[category == "services"], np.log(900))) < 1
    assert _robust_z(log_price[(category == "stationery") & (lines["invoice"] != PLANTED).to_numpy()],
                     np.log(900)) > 10
    # Without --within it is not flagged; with it, it is flagged within its segment, and the overall view of the
    # within scan is the plain scan's, value for value.
    assert not plain.flagged[i]
    assert within.within.flagged[i] and not within.flagged[i]
    assert within.within.label(i) == "category = stationery" and within.within.scored_against(i) is None
    np.testing.assert_array_equal(within.consensus, plain.consensus)
    np.testing.assert_array_equal(within.flagged, plain.flagged)
    # Among the records unusual within their segment but not overall, it is the most unusual there.
    w = within.within
    only = np.flatnonzero(w.within_only)
    assert only[np.argmax(w.consensus_z[only])] == i
    assert "unusual within their segment (category) but not overall" in within.summary()


def test_every_segment_with_its_own_fit_is_what_a_scan_of_its_rows_alone_gives(lines, within):
    # Reference: investigator.scan of each segment's rows alone, the category left out (constant there).
    w = within.within
    own = [s for s in w.segments if s.scored_against is None]
    assert [s.label for s in own] == ["category = services", "category = stationery", "category = travel"]
    for s in own:
        rows = np.flatnonzero(lines["category"].to_numpy() == s.values[0])
        # A segment's own scan searches with the segment effort (fewer MCD starts and trees, scoring.SEGMENT)
        # and starts from the whole table's kinds of normal, not a search of its own.
        carried = None if within.kinds is None else within.kinds.labels[rows]
        alone = run_scan(load_table(lines.iloc[rows].reset_index(drop=True), id_column="invoice"),
                         ScanOptions(id="invoice", exclude=("category",), seed=SEED), effort=SEGMENT,
                         kinds_from=carried)
        for key, r in alone.method_results.items():
            np.testing.assert_array_equal(w.methods[key].scores[rows], r.scores, err_msg=f"{s.label} {key}")
            np.testing.assert_array_equal(w.methods[key].flags[rows], r.flags)
        np.testing.assert_array_equal(w.consensus[rows], alone.consensus)
        np.testing.assert_array_equal(w.flagged[rows], alone.flagged)
        assert s.flagged == int(alone.flagged.sum()) and s.records == len(rows)


def test_local_density_and_neighbor_distance_within_a_segment_match_scikit_learn_and_scipy(lines, within):
    # Reference libraries: scikit-learn's LocalOutlierFactor (same k = 20) and SciPy's cdist (10th neighbour) on
    # the segment's own prepared features; the travel segment has no exact copies, where the two definitions agree.
    w = within.within
    s = next(k for k, seg in enumerate(w.segments) if seg.label == "category = travel")
    Z = w.fits[s].features.values
    assert len(np.unique(Z, axis=0)) == len(Z)  # no copies in the segment
    rows = w.positions[s]
    lof = -LocalOutlierFactor(n_neighbors=20).fit(Z).negative_outlier_factor_
    np.testing.assert_allclose(w.methods["local_density"].scores[rows], lof, rtol=1e-12)
    D = cdist(Z, Z)
    np.fill_diagonal(D, np.inf)
    np.testing.assert_allclose(w.methods["neighbor_distance"].scores[rows], np.sort(D, axis=1)[:, 9], rtol=1e-12)


# -- segments too small --------------------------------------------------------------------------------------


def test_segments_below_the_line_are_named_in_a_notice_and_scored_against_the_whole_table(lines, within):
    w = within.within
    # The line for 4 features (the category is not one within a segment): max(50, 10 x 4) = 50.
    assert w.min_records == segment_line(4) == max(MIN_RECORDS, PER_FEATURE * 4) == 50
    notices = within.run.notices
    for name, n in (("catering", 8), ("hardware", 40)):
        notice = next(t for t in notices if t.startswith(f"segment category = {name}:"))
        assert f"{n} records, fewer than the 50 a segment needs for its own fit" in notice
        assert "scored against the whole table" in notice
        # Their prices (around 45 and 120) lie outside the bulk of every segment with its own fit, so they keep
        # the whole table's view, value for value.
        rows = np.flatnonzero(lines["category"].to_numpy() == name)
        np.testing.assert_array_equal(w.consensus[rows], within.consensus[rows])
        np.testing.assert_array_equal(w.flagged[rows], within.flagged[rows])
        for key, r in within.method_results.items():
            np.testing.assert_array_equal(w.methods[key].scores[rows], r.scores[rows])


def workshop_jobs(seed: int = 11) -> pd.DataFrame:
    """Invented repair jobs of four workshops: two large (costs around 100 and 1,000), a small one whose costs
    are like the second's, and a small one like neither."""
    rng = np.random.default_rng(seed)
    spec = {"north": (400, 100), "south": (400, 1000), "harbour": (15, 1000), "airfield": (10, 30)}
    parts = [pd.DataFrame({"site": name, "hours": rng.integers(1, 9, n),
                           "cost": np.round(rng.lognormal(np.log(centre), 0.3, n), 2)})
             for name, (n, centre) in spec.items()]
    return pd.concat(parts, ignore_index=True).sample(frac=1, random_state=seed).reset_index(drop=True)


def test_a_small_segment_like_a_large_one_is_scored_against_that_segments_fit():
    jobs = workshop_jobs()
    result = investigator.scan(jobs, within="site")
    w = result.within
    against = {s.label: s.scored_against for s in w.segments}
    assert against == {"site = airfield": "the whole table", "site = harbour": "site = south",
                       "site = north": None, "site = south": None}
    assert any(t.startswith("segment site = harbour: 15 records, fewer than the 50") and "site = south" in t
               for t in result.run.notices)
    # Reference: the scan model fitted on the south workshop's jobs alone (the path that scores new blocks of a
    # dataset) scoring the harbour jobs, which are not part of the fit; fitted with a segment's effort.
    south = jobs[jobs["site"] == "south"].reset_index(drop=True)
    harbour = np.flatnonzero(jobs["site"].to_numpy() == "harbour")
    model = ScanModel.fit(load_table(south), ScanOptions(exclude="site"), effort=SEGMENT)
    scored = model.score(jobs.iloc[harbour].reset_index(drop=True), first_row=len(jobs))
    for key, r in scored.method_results.items():
        np.testing.assert_array_equal(w.methods[key].scores[harbour], r.scores)
    np.testing.assert_array_equal(w.consensus[harbour], scored.consensus)
    np.testing.assert_array_equal(w.flagged[harbour], scored.flagged)


# -- outputs -------------------------------------------------------------------------------------------------


def test_json_and_csv_hold_both_views(lines, within, tmp_path):
    w = within.within
    doc = json.loads(within.write(tmp_path / "scan.json").read_text(encoding="utf-8"))
    assert doc["run"]["parameters"]["within"] == ["category"]
    section = doc["run"]["within"]
    assert section["columns"] == ["category"] and section["min_records"] == 50
    assert [s["segment"] for s in section["segments"]] == [s.label for s in w.segments]
    assert sum(s["records"] for s in section["segments"]) == len(lines)
    assert section["flagged_within_only"] == int(w.within_only.sum())
    frame = pd.read_csv(within.write(tmp_path / "scan.csv"), keep_default_na=False)
    for i in (_position(lines, PLANTED), 0, len(lines) - 1):
        rec = doc["records"][i]
        assert rec["consensus"] == within.consensus[i] and rec["flagged"] == bool(within.flagged[i])
        assert rec["segment"] == w.label(i) == frame.loc[i, "segment"]
        assert rec["within_consensus"] == w.consensus[i] and rec["within_flagged"] == bool(w.flagged[i])
        assert rec["within_scores"] == {k: float(m.scores[i]) for k, m in w.methods.items()}
        assert rec["within_scored_against"] == w.scored_against(i)
        assert frame.loc[i, "within_consensus"] == pytest.approx(w.consensus[i], rel=1e-15)
        assert frame.loc[i, "consensus"] == pytest.approx(within.consensus[i], rel=1e-15)
        assert str(frame.loc[i, "within_flagged"]) == str(bool(w.flagged[i]))
        for k, m in w.methods.items():
            assert frame.loc[i, f"within_score_{k}"] == pytest.approx(m.scores[i], rel=1e-15)
    catering = _position(lines, lines.loc[lines["category"] == "catering", "invoice"].iloc[0])
    assert frame.loc[catering, "within_scored_against"] == "the whole table"
    assert frame.loc[_position(lines, PLANTED), "within_scored_against"] == ""


def test_the_explanation_says_what_is_unusual_for_the_segment(lines, within):
    i = _position(lines, PLANTED)
    e = within.explain(PLANTED)
    assert e.within is not None and e.within.flagged and e.within.segment == "category = stationery"
    # The typical range said there is the stationery lines' own: the quartiles of their unflagged prices (numpy).
    price = next(t for t in e.within.top_features if t.feature == "unit_price")
    assert price.direction == "higher" and price.value == 900.0
    w = within.within
    s = int(w.segment[i])
    ordinary = w.positions[s][~w.fits[s].flagged]
    q1, median, q3 = np.quantile(lines["unit_price"].to_numpy()[ordinary], [0.25, 0.5, 0.75])
    assert (price.typical.q1, price.typical.median, price.typical.q3) == pytest.approx((q1, median, q3), rel=1e-12)
    text = explanation_text(e)
    assert "unusual for category = stationery" in text
    assert "unit_price is higher than is typical for category = stationery (900;" in text
    assert e.to_dict()["within"]["segment"] == "category = stationery"
    ordinary_line = within.explain(lines.loc[lines["category"] == "services", "invoice"].iloc[0])
    assert "Within its segment (category = services, 2,020 records)" in explanation_text(ordinary_line)


def test_the_report_and_the_workspace_show_the_within_view(lines, within, tmp_path):
    from investigator.report import write_report
    from investigator.tui.models.cases import cases_data

    i = _position(lines, PLANTED)
    html = write_report(within, tmp_path / "report.html", cases=5).read_text(encoding="utf-8")
    section = html[html.index('<section id="within">'):]
    section = section[:section.index("</section>")]
    assert PLANTED in section and "unusual for category = stationery" in section
    assert "category = catering" in section and "the whole table" in section
    # The Cases list: the within consensus of every record, sorted by it (numpy's stable argsort, highest first,
    # is the order records with equal values keep too).
    data = cases_data(within)
    np.testing.assert_array_equal(data.within, within.within.consensus)
    assert data.within_flagged[i] and data.segment[i] == "category = stationery" and "within" in data.sorts()
    order = data.order("within")
    assert np.all(np.diff(data.within[order]) <= 0) and order[0] == np.argmax(within.within.consensus)


# -- reproducible, whatever the order of the rows ------------------------------------------------------------


def test_the_within_view_is_the_same_for_a_seed_whatever_the_row_order(lines, within):
    shuffled = lines.sample(frac=1, random_state=99).reset_index(drop=True)
    again = investigator.scan(shuffled, id="invoice", within="category", seed=SEED)
    order = pd.Index(shuffled["invoice"]).get_indexer(lines["invoice"])  # each line's position in the shuffle
    w, v = within.within, again.within
    # Flags exactly; scores to rounding (sums over rows in another order), as
    # tests/accuracy/test_messy_data.py asks of the plain scan.
    np.testing.assert_array_equal(v.flagged[order], w.flagged)
    np.testing.assert_allclose(v.consensus[order], w.consensus, rtol=1e-10)
    for key in w.methods:
        np.testing.assert_allclose(v.methods[key].scores[order], w.methods[key].scores, rtol=1e-10, err_msg=key)
    assert [s.as_dict() for s in v.segments] == [s.as_dict() for s in w.segments]
    # The same seed again, the same rows: the same view, bit for bit.
    once_more = investigator.scan(lines, id="invoice", within="category", seed=SEED).within
    np.testing.assert_array_equal(once_more.consensus, w.consensus)


# -- integer codes, two columns, a reference, bad input -------------------------------------------------------


def test_integer_codes_name_their_segments_without_a_decimal_point():
    jobs = workshop_jobs()
    jobs["bay"] = np.where(np.arange(len(jobs)) % 2, 7.0, 12.0)  # integer codes read as floats ...
    jobs.loc[:59, "bay"] = np.nan  # ... because some are missing
    result = investigator.scan(jobs, within="bay", methods="robust_distance,neighbor_distance")
    labels = [s.label for s in result.within.segments]
    assert labels == ["bay = (missing)", "bay = 12", "bay = 7"]
    assert [s.records for s in result.within.segments] == [60, int((jobs["bay"] == 12).sum()),
                                                           int((jobs["bay"] == 7).sum())]


def test_two_columns_make_one_segment_per_combination_of_their_values():
    jobs = workshop_jobs()
    jobs["shift"] = np.where(np.arange(len(jobs)) % 3, "day", "night")
    result = investigator.scan(jobs, within="site,shift", methods="robust_distance,neighbor_distance")
    expected = jobs.groupby(["site", "shift"]).size()  # pandas, sorted by the values
    assert [(s.label, s.records) for s in result.within.segments] == [
        (f"site = {site}, shift = {shift}", int(n)) for (site, shift), n in expected.items()]


def test_a_check_judges_new_records_against_their_segments_reference_records():
    jobs = workshop_jobs()
    new = pd.DataFrame({"site": ["north", "south", "quarry", "dock"], "hours": [4, 4, 4, 4],
                        "cost": [1000.0, 1000.0, 100.0, 30.0]})
    result = investigator.check(new, reference=jobs, within="site")
    w = result.within
    # 1,000 is far out for the north workshop (costs around 100), ordinary for the south one. The quarry and the
    # dock have no reference records: a job costing 100 is judged against the north workshop, whose jobs it is
    # like; one costing 30 is like no workshop's and is judged against the whole reference.
    assert w.flagged[:2].tolist() == [True, False]
    assert [w.scored_against(i) for i in range(4)] == [None, None, "site = north", "the whole table"]
    assert w.consensus[3] == result.consensus[3] and w.flagged[3] == result.flagged[3]
    assert [s.label for s in w.segments] == ["site = dock", "site = north", "site = quarry", "site = south"]
    assert any(t.startswith("segment site = quarry: no reference record has these values; scored against segment "
                            "site = north") for t in result.run.notices)


def test_within_on_the_dask_engine_is_refused_in_one_line():
    with pytest.raises(InputError, match="`within` is not available with `scan_dataset`"):
        check_dask_options(ScanOptions(within="site"))


@pytest.mark.parametrize(("column", "words"), [
    ("colour", ["jobs.csv", "--within", "'colour'", "not in the file", "columns are"]),
    ("depot", ["jobs.csv", "--within", "'depot'", "one value only", "'main'", "name a column"]),
    ("site,depot", ["--within", "'depot'", "one value only"]),
    ("job", ["--within", "'job'", "a different value for every record", "name a column that groups"]),
])
def test_a_within_column_missing_or_with_one_value_exits_2_with_one_line(cli, tmp_path, column, words):
    jobs = workshop_jobs()
    jobs["depot"] = "main"
    jobs["job"] = [f"J{i:04d}" for i in range(len(jobs))]
    path = tmp_path / "jobs.csv"
    jobs.to_csv(path, index=False)
    code, out, err = cli("scan", path, "--within", column)
    assert code == 2 and out == ""
    assert_one_line_error(err, *words)
