"""The map and groups inside a scan: patterns per record, groups as cases, kinds of normal, outputs."""

import json

import numpy as np
import pandas as pd
import pytest

import investigator
from investigator.cli.main import main


@pytest.fixture(scope="module")
def two_kinds():
    # Generated (seed fixed): two large Gaussian clusters, eight near-duplicate records far from both, and
    # five lone far points (the check of the map issue).
    rng = np.random.default_rng(40)
    a = rng.normal(0, 1, size=(600, 4))
    b = rng.normal(0, 1, size=(300, 4)) + [9, 9, 0, 0]
    eight = np.array([4.5, -6.0, 5.0, 5.0]) + rng.normal(0, 0.02, size=(8, 4))
    lone = np.array([[15, -8, 6, -6], [-9, 12, -7, 7], [20, 20, 10, -10], [-12, -12, 9, 9], [5, 18, -9, -9]],
                    dtype=float)
    frame = pd.DataFrame(np.vstack([a, b, eight, lone]), columns=["w", "x", "y", "z"])
    return investigator.scan(frame, log="none", map="pca"), np.arange(900, 908), np.arange(908, 913)


def test_the_eight_are_one_group_and_the_five_are_isolated(two_kinds):
    result, eight, lone = two_kinds
    assert result.flagged[eight].all() and result.flagged[lone].all()
    groups = {int(result.groups.group[i]) for i in eight}
    assert len(groups) == 1
    gid = groups.pop()
    assert result.groups.size_of(gid) == 8 and not result.groups.is_large(gid)
    assert all(result.record(i)["pattern"] == "group" and result.record(i)["group_size"] == 8 for i in eight)
    assert all(result.record(i)["pattern"] == "isolated" for i in lone)


def test_large_clusters_are_kinds_of_normal_not_outliers(two_kinds):
    result, _, _ = two_kinds
    assert len(result.groups.large_ids) == 2
    # One ellipse for all records (a single MCD) puts most of the smaller cluster beyond the cutoff ...
    from scipy import stats

    from investigator.methods.mcd import FastMCD, sq_distances

    X = result.features.values
    single = FastMCD().fit(X)
    far = sq_distances(X, single.location, single.covariance) > stats.chi2.ppf(0.975, 4)
    assert far[600:900].mean() > 0.5
    # ... while the scan flags no more than the usual tail of either cluster (2.5% per method nominally; a
    # 300-record MCD runs a little above it).
    assert result.flagged[:600].mean() < 0.05 and result.flagged[600:900].mean() < 0.05
    assert result.flags("robust_distance")[600:900].mean() < 0.08
    assert "kinds of normal" in " ".join(result.run.notices)
    assert result.kinds.n_kinds == 2 and len(result.kinds.fits) == 2  # one MCD per kind


def test_a_group_is_one_case_with_a_profile(two_kinds, tmp_path):
    result, eight, _ = two_kinds
    cases = result.group_cases
    assert len(cases) == 1 and cases[0].size == 8
    assert [m.row for m in cases[0].members] == [int(i) + 1 for i in eight]
    # The eight were planted at x = -6 (below both clusters) and y = z = 5 (far above both), while w = 4.5
    # lies between the clusters: the profile leads with the three planted differences.
    assert {p.feature for p in cases[0].profile[:3]} == {"x", "y", "z"}
    result.write(tmp_path / "scan.json")
    doc = json.loads((tmp_path / "scan.json").read_text())
    assert doc["groups"][0]["size"] == 8
    rec = doc["records"][900]
    assert rec["pattern"] == "group" and rec["group"] == cases[0].group and len(rec["map"]) == 2
    frame = pd.read_csv(result.write(tmp_path / "scan.csv"))
    assert {"map_x", "map_y", "pattern", "group"} <= set(frame.columns)
    assert frame.loc[905, "pattern"] == "group"


@pytest.mark.slow
def test_map_is_off_by_default_and_the_map_command_draws_it(tmp_path, capsys):
    rng = np.random.default_rng(41)
    frame = pd.DataFrame(rng.normal(size=(150, 3)), columns=list("abc"))
    frame.loc[3] = [8, 8, 8]
    assert investigator.scan(frame).map is None
    path = tmp_path / "t.csv"
    frame.to_csv(path, index=False)
    out = tmp_path / "map.png"
    assert main(["map", str(path), "--map", "pca", "--out", str(out)]) == 0
    assert out.stat().st_size > 10_000 and "Map written" in capsys.readouterr().out
    assert main(["map", str(path), "--out", str(tmp_path / "map.txt")]) == 2
    assert main(["scan", str(path), "--map", "sideways"]) == 2
