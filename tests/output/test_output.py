"""The output contract: JSON, CSV and Parquet, reproducibility, and spreadsheet safety."""

import json

import numpy as np
import pandas as pd
import pytest

import investigator
from investigator.cli.main import main
from investigator.methods import METHOD_KEYS


@pytest.fixture(scope="module")
def claims(tmp_path_factory):
    rng = np.random.default_rng(11)
    n = 150
    frame = pd.DataFrame({
        "ref": [f"R{i:04d}" for i in range(n)],
        "amount": np.round(rng.lognormal(4, 0.6, size=n), 2),
        "hours": rng.normal(8, 1.5, size=n).round(1),
        "site": rng.choice(["north", "south", "east"], size=n, p=[0.5, 0.3, 0.2]),
        "comment": ["checked by the night shift"] * n,
    })
    frame.loc[3, "amount"] = 25_000.0
    frame.loc[5, "ref"] = "=HYPERLINK(\"x\")"
    frame.loc[9, "hours"] = np.nan
    path = tmp_path_factory.mktemp("out") / "claims.csv"
    frame.to_csv(path, index=False)
    return path


def test_json_contract(claims, tmp_path):
    out = tmp_path / "scan.json"
    assert main(["scan", str(claims), "--id", "ref", "--out", str(out), "--quiet"]) == 0
    doc = json.loads(out.read_text())
    run, records = doc["run"], doc["records"]
    for key in ("input", "features", "parameters", "seed", "versions", "started", "notices", "methods",
                "rule", "columns"):
        assert key in run
    assert run["input"]["sha256"] and run["input"]["rows"] == 150 and run["input"]["columns"] == 5
    assert set(run["methods"]) == set(METHOD_KEYS)
    for m in run["methods"].values():
        assert {"parameters", "cutoff", "score"} <= set(m)
    assert {f["name"] for f in run["features"]} == {"amount", "hours", "site"}
    assert len(records) == 150
    rec = records[3]
    assert rec["row"] == 4 and rec["key"] == "R0003"
    assert set(rec["scores"]) == set(METHOD_KEYS) == set(rec["flags"])
    assert 0 <= rec["consensus"] <= 1 and rec["votes"] == sum(rec["flags"].values())
    assert rec["flagged"] is True
    assert any(h["column"] == "amount" for h in rec["column_hits"])
    assert {"column", "rule", "value"} <= set(rec["column_hits"][0])
    assert records[9]["imputed"] == ["hours"]


@pytest.mark.slow
def test_csv_and_parquet_columns(claims, tmp_path):
    result = investigator.scan(claims, id="ref")
    csv = pd.read_csv(result.write(tmp_path / "scan.csv"))
    parquet = pd.read_parquet(result.write(tmp_path / "scan.parquet"))
    expected = ["row", "key", "rank", "consensus", "consensus_z", "votes", "flagged", "flag_reason"] + [
        f"score_{k}" for k in METHOD_KEYS] + [f"flag_{k}" for k in METHOD_KEYS]
    for frame in (csv, parquet):
        assert list(frame.columns[: len(expected)]) == expected
        assert len(frame) == 150
    np.testing.assert_allclose(csv["consensus"], result.consensus, rtol=1e-12)
    np.testing.assert_allclose(parquet["score_robust_distance"], result.scores("robust_distance"))


@pytest.mark.slow
def test_csv_neutralises_formula_cells(claims, tmp_path):
    # OWASP "CSV Injection": cells starting with = + - @ tab or CR must not be run as formulas.
    result = investigator.scan(claims, id="ref")
    text = (result.write(tmp_path / "scan.csv")).read_text()
    assert "'=HYPERLINK" in text
    assert "\n6,=" not in text


def _without_start(text):
    doc = json.loads(text)
    doc["run"].pop("started")
    return json.dumps(doc)


@pytest.mark.slow
def test_same_seed_gives_byte_identical_results(claims, tmp_path):
    a, b, c = tmp_path / "a.json", tmp_path / "b.json", tmp_path / "c.json"
    for out in (a, b):
        assert main(["scan", str(claims), "--id", "ref", "--seed", "3", "--out", str(out), "--quiet"]) == 0
    investigator.scan(claims, id="ref", seed=3).write(c)  # the API gives the same bytes as the CLI
    texts = [_without_start(p.read_text()) for p in (a, b, c)]
    assert texts[0] == texts[1] == texts[2]
    strip = [p.read_text().splitlines() for p in (a, b)]
    assert [line for line in strip[0] if '"started"' not in line] == [
        line for line in strip[1] if '"started"' not in line]
    for ext in ("csv", "parquet"):
        x, y = tmp_path / f"x.{ext}", tmp_path / f"y.{ext}"
        investigator.scan(claims, id="ref", seed=3).write(x)
        investigator.scan(claims, id="ref", seed=3).write(y)
        assert x.read_bytes() == y.read_bytes()


@pytest.mark.slow
def test_summary_mentions_flags_and_caution(claims, capsys):
    assert main(["scan", str(claims), "--id", "ref"]) == 0
    out = capsys.readouterr().out
    assert "Flagged:" in out and "R0003" in out
    assert "not proof of error or fraud" in out


@pytest.mark.slow
def test_quiet_prints_nothing(claims, capsys):
    assert main(["scan", str(claims), "--quiet"]) == 0
    captured = capsys.readouterr()
    assert captured.out == "" and captured.err == ""


@pytest.mark.slow
def test_scan_outputs_carry_verdicts_when_a_store_exists(claims, tmp_path):
    data = tmp_path / "claims.csv"
    data.write_bytes(claims.read_bytes())
    plain = investigator.scan(data, id="ref")
    assert plain.verdicts is None and "verdict" not in plain.record(0)
    assert main(["verdict", str(data), "--id", "ref", "--key", "R0003", "--set", "confirmed",
                 "--note", "double keyed"]) == 0
    result = investigator.scan(data, id="ref")
    assert result.record(3)["verdict"] == "confirmed" and result.record(3)["note"] == "double keyed"
    assert result.record(4)["verdict"] is None
    frame = pd.read_csv(result.write(tmp_path / "scan.csv"))
    assert frame.loc[3, "verdict"] == "confirmed"


def test_the_imputed_and_column_hit_columns_name_exactly_the_missing_cells_and_the_hits():
    # Reference: the input itself (pandas' isna on the cells given) and the result's own hit lists; most
    # records have neither, and their text is empty. Invented: 1-5 ratings, zero-inflated amounts to the
    # cent, a few cells left blank in one or two columns.
    from investigator.output.records import result_frame

    rng = np.random.default_rng(8)
    frame = pd.DataFrame({"rating": rng.integers(1, 6, 400).astype(float),
                          "amount": np.where(rng.random(400) < 0.6, 0.0, np.round(rng.lognormal(3, 1, 400), 2)),
                          "items": rng.integers(1, 9, 400).astype(float)})
    frame.loc[[3, 40, 41], "rating"] = np.nan
    frame.loc[[40, 77], "items"] = np.nan
    frame.loc[5, "amount"] = 9_000.0
    result = investigator.scan(frame, log="none")
    out = result_frame(result)
    expected = ["; ".join(c for c in ("rating", "items") if pd.isna(frame.at[i, c])) for i in range(len(frame))]
    assert out["imputed"].tolist() == expected
    assert out["imputed"][40] == "rating; items"
    hits = ["; ".join(f"{h['column']}: {h['rule']}" for h in row) for row in result.column_hits]
    assert out["column_hits"].tolist() == hits and hits[5] != ""
