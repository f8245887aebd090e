"""Reference mode (`check`): fitting on history only, phase I cleaning, Hotelling, limits and screens."""

import json

import numpy as np
import pandas as pd
import pytest

import investigator
from investigator.cli.main import main
from investigator.methods.hotelling import phase_ii_limit


def batches(n, seed, bad_share=0.0):
    """In-control batches: three correlated measurements and a line; a share of bad batches shifted."""
    rng = np.random.default_rng(seed)
    base = rng.normal(size=(n, 3)) @ np.array([[1.0, 0.4, 0.2], [0.0, 1.0, 0.3], [0.0, 0.0, 1.0]])
    frame = pd.DataFrame(base * [0.5, 2.0, 0.1] + [50.0, 200.0, 7.0], columns=["viscosity", "pressure", "ph"])
    frame.insert(0, "batch", [f"B{seed}-{i:04d}" for i in range(n)])
    frame["line"] = rng.choice(["L1", "L2"], size=n)
    k = int(round(bad_share * n))
    frame.loc[: k - 1, ["viscosity", "pressure"]] += [2.5, 9.0]
    return frame


def three_sigma(result, column):
    lim = next(lim for lim in result.rules.limits_ if result.features.names[lim.column] == column)
    return lim.lower["three_sigma"], lim.upper["three_sigma"]


def three_sigma_upper(result, column):
    return three_sigma(result, column)[1]


@pytest.mark.slow
def test_phase_i_cleaning_keeps_the_limits_of_a_clean_reference():
    clean = batches(400, 1)
    dirty = pd.concat([batches(40, 2, bad_share=1.0), batches(360, 3)], ignore_index=True)  # 10% bad
    new = batches(30, 4)
    ref_clean = investigator.check(new, reference=clean, id="batch")
    cleaned = investigator.check(new, reference=dirty, id="batch")
    kept = investigator.check(new, reference=dirty, id="batch", keep_reference_outliers=True)
    excluded = {r.key for r in cleaned.run.reference.phase_i.records}
    assert {f"B2-{i:04d}" for i in range(40)} <= excluded  # every bad batch is listed and left out
    assert cleaned.run.reference.used == 400 - len(excluded)
    assert kept.run.reference.used == 400
    for col in ("viscosity", "pressure"):
        width = {name: np.diff(three_sigma(r, col))[0]
                 for name, r in (("clean", ref_clean), ("cleaned", cleaned), ("kept", kept))}
        assert three_sigma_upper(kept, col) > three_sigma_upper(cleaned, col)
        assert abs(three_sigma_upper(cleaned, col) - three_sigma_upper(ref_clean, col)) < 0.5 * abs(
            three_sigma_upper(kept, col) - three_sigma_upper(ref_clean, col))
        assert width["kept"] > width["cleaned"]
    # Hotelling's covariance from the kept reference is wider too (a larger determinant).
    det = {name: np.linalg.det(r.method_results["hotelling"].method.covariance_)
           for name, r in (("clean", ref_clean), ("cleaned", cleaned), ("kept", kept))}
    assert det["kept"] > 2 * det["cleaned"] and det["cleaned"] < 2 * det["clean"]


@pytest.mark.slow
def test_new_records_are_scored_against_the_reference_only():
    ref, new = batches(300, 5), batches(25, 6)
    new.loc[3, "pressure"] += 15
    full = investigator.check(new, reference=ref, id="batch")
    alone = investigator.check(new.iloc[[3]], reference=ref, id="batch")
    # New records do not shift the reference: a record scores the same with or without the others.
    for key in full.method_results:
        assert alone.scores(key)[0] == pytest.approx(full.scores(key)[3], rel=1e-12)
    assert full.flagged[3]
    # Peers come from the reference.
    e = full.explain("B6-0003")
    assert e.peers.source == "reference"
    assert all(p.key.startswith("B5-") for p in e.peers.records)


@pytest.mark.slow
def test_hotelling_is_reported_with_its_phase_ii_limit_and_split():
    ref, new = batches(200, 7), batches(20, 8)
    new.loc[0, "viscosity"] += 3
    result = investigator.check(new, reference=ref, id="batch")
    hot = result.run.method_fits["hotelling"]
    m = hot.parameters["reference_records"]
    assert hot.cutoff == pytest.approx(phase_ii_limit(m, 3, 0.025))
    assert "hotelling" not in result.run.rule  # reported, without a vote
    e = result.explain("B8-0000")
    split = e.contributions["hotelling"]
    assert sum(c.value for c in split) == pytest.approx(result.scores("hotelling")[0], rel=1e-9)
    assert split[0].feature == "viscosity"


@pytest.mark.slow
def test_mismatches_between_reference_and_new_records():
    ref = batches(100, 9)
    new = batches(10, 10)
    with pytest.raises(investigator.InputError, match="lacks column 'ph'"):
        investigator.check(new.drop(columns="ph"), reference=ref, id="batch")
    text = new.astype({"pressure": str})
    text["pressure"] = "high"
    with pytest.raises(investigator.InputError, match="'pressure' holds numbers in the reference but text"):
        investigator.check(text, reference=ref, id="batch")
    extra = new.assign(operator="ann")
    result = investigator.check(extra, reference=ref, id="batch")
    assert any("operator" in n for n in result.run.notices)
    assert result.run.reference.extra_columns == ["operator"]
    unseen = new.copy()
    unseen.loc[2, "line"] = "L9"
    result = investigator.check(unseen, reference=ref, id="batch")
    assert result.run.reference.unseen_levels == {"line": {"L9": 1}}
    assert any("'L9'" in n for n in result.run.notices)


@pytest.mark.slow
def test_check_command_and_limits(tmp_path, capsys):
    ref, new = tmp_path / "history.csv", tmp_path / "today.csv"
    batches(150, 11).to_csv(ref, index=False)
    today = batches(12, 12)
    today.loc[5, "ph"] = 7.9
    today.to_csv(new, index=False)
    limits = tmp_path / "limits.csv"
    limits.write_text("column,lower,upper\nph,6.5,7.5\npressure,,\n")
    out = tmp_path / "check.json"
    assert main(["check", str(new), "--reference", str(ref), "--id", "batch", "--limits", str(limits),
                 "--out", str(out), "--quiet"]) == 2  # pressure has neither limit
    assert "neither a lower nor an upper" in capsys.readouterr().err
    limits.write_text("column,lower,upper\nph,6.5,7.5\n")
    assert main(["check", str(new), "--reference", str(ref), "--id", "batch", "--limits", str(limits),
                 "--out", str(out)]) == 0
    summary = capsys.readouterr().out
    assert "Reference:" in summary and "Out of specification: 1 record breaks" in summary
    assert "B12-0005 (ph 7.9 above 7.5)" in summary  # named, with what it breaks
    doc = json.loads(out.read_text())
    assert doc["run"]["reference"]["input"]["sha256"]
    rec = doc["records"][5]
    assert rec["out_of_spec"] == [{"column": "ph", "value": 7.9, "lower": 6.5, "upper": 7.5, "side": "above"}]
    assert "hotelling" in rec["scores"]
    assert main(["check", str(new), "--reference", str(tmp_path / "nope.csv")]) == 2


@pytest.mark.slow
def test_benford_and_duplicate_screens_in_a_scan(tmp_path):
    rng = np.random.default_rng(13)
    n = 600
    frame = pd.DataFrame({
        "vendor": rng.choice(["Alder", "Birch", "Cedar", "Dogwood"], size=n),
        "amount": np.round(10 ** rng.uniform(1, 5, size=n), 2),  # log-uniform over four decades
        "days": rng.integers(1, 60, size=n),
    })
    frame.loc[[10, 11], ["vendor", "amount"]] = [["Birch", 999.0], ["Birch", 999.0]]
    result = investigator.scan(frame, digits="amount", duplicates="vendor,amount")
    benford = result.run.screens["benford"]["amount"]
    assert benford["first_digit"]["conformity"] in ("close", "acceptable")
    groups = result.run.screens["duplicates"]["groups"]
    assert any(g["rows"] == [11, 12] for g in groups)
    with pytest.raises(investigator.InputError, match="digits"):
        investigator.scan(frame, digits="nope")
