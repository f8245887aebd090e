"""The amount screens through the command line and the API: --round, --threshold and the last two digits with
--digits, on invented expense claims written as users' files are (currency text, whole amounts, copies, zeros);
bad options exit 2 with one line."""

from __future__ import annotations

import contextlib
import io
import json

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import investigator
from fixtures.cli import assert_one_line_error

N_ORDINARY, N_BELOW, N_ROUND = 1200, 30, 40


def expense_claims() -> pd.DataFrame:
    """Invented claims of a fictional surveying firm: 1,200 ordinary claims with cents, 30 kept just under an
    approval limit of 5,000 (4,900-4,999.99), 40 written as round sums (1,000, 1,500, ..., 3,500.00), 60 zero
    claims (withdrawn) and 25 copies of one mileage claim; amounts written as currency text ($1,234.56)."""
    rng = np.random.default_rng(21)
    ordinary = np.round(rng.lognormal(np.log(700), 0.9, N_ORDINARY), 2)
    below = np.round(rng.uniform(4900, 4999.99, N_BELOW), 2)
    round_sums = rng.integers(2, 8, N_ROUND) * 500.0
    amounts = np.concatenate([ordinary, below, round_sums, np.zeros(60), np.full(25, 86.40)])
    n = len(amounts)
    return pd.DataFrame({
        "claim": [f"EX-{i:05d}" for i in range(n)],
        "nights": rng.integers(0, 4, n),
        "distance": np.round(rng.gamma(3, 40, n), 1),
        "amount": [f"${a:,.2f}" for a in amounts],
    })


@pytest.fixture(scope="module")
def claims_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("claims") / "claims.csv"
    expense_claims().to_csv(path, index=False)
    return path


@pytest.fixture(scope="module")
def scanned(claims_file, tmp_path_factory):
    """One scan with every amount screen, through the command line: its JSON read back, and its summary."""
    from investigator.cli.main import main

    out = tmp_path_factory.mktemp("out") / "scan.json"
    args = ["scan", str(claims_file), "--id", "claim", "--digits", "amount", "--threshold", "amount=5000",
            "--threshold", "amount=3000:100,distance=200", "--round", "distance", "--out", str(out)]
    summary, bar = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(summary), contextlib.redirect_stderr(bar):
        assert main(args) == 0
    record = json.loads(out.read_text(encoding="utf-8"))
    record["summary"] = summary.getvalue()
    return record


@pytest.mark.slow
def test_every_amount_screen_is_in_the_run_record(scanned):
    screens = scanned["run"]["screens"]
    assert list(screens["round_amounts"]) == ["amount", "distance"]  # --digits/--threshold columns, then --round
    assert list(screens["last_two_digits"]) == ["amount"] and "amount" in screens["benford"]
    assert [(t["column"], t["threshold"], t["width"]) for t in screens["thresholds"]] == [
        ("amount", 5000.0, 250.0), ("amount", 3000.0, 100.0), ("distance", 200.0, 10.0)]
    assert scanned["run"]["parameters"]["threshold"] == [["amount", 5000.0, None], ["amount", 3000.0, 100.0],
                                                         ["distance", 200.0, None]]
    assert scanned["run"]["parameters"]["round"] == ["distance"]


@pytest.mark.slow
def test_the_planted_claims_are_found_by_key(scanned):
    screens = scanned["run"]["screens"]
    limit = screens["thresholds"][0]
    listed = {r["key"] for r in limit["records"]}
    planted = {f"EX-{i:05d}" for i in range(N_ORDINARY, N_ORDINARY + N_BELOW)}
    assert planted <= listed and limit["p_value"] < 1e-6
    # The p-value is SciPy's one-sided binomial test of the counts the screen reports.
    ref = stats.binomtest(limit["below"], limit["below"] + limit["above"], 0.5, alternative="greater")
    assert limit["p_value"] == pytest.approx(ref.pvalue, rel=1e-12)
    rounded = screens["round_amounts"]["amount"]
    # Currency text read as numbers: $1,500.00 is a whole-unit amount ending in 00; the 60 zeros are left out.
    assert rounded["ignored"]["zero"] == 60
    sums = {f"EX-{i:05d}" for i in range(N_ORDINARY + N_BELOW, N_ORDINARY + N_BELOW + N_ROUND)}
    assert sums <= {r["key"] for r in rounded["records"]}
    level = rounded["levels"][0]
    assert level["ending"] == "00" and level["p_value"] < 1e-6
    # The 40 round sums (pair 00) and the 25 copies of 86.40 (pair 86) lead the last two digits, in that order.
    last = scanned["run"]["screens"]["last_two_digits"]["amount"]
    assert last["excess_pairs"][:2] == ["00", "86"] and last["p_value"] < 1e-6


@pytest.mark.slow
def test_the_summary_names_each_screen(scanned):
    out = scanned["summary"]
    limit = scanned["run"]["screens"]["thresholds"][0]
    assert (f"Just below amount 5,000: {limit['below']:,} records from 4,750 to under 5,000 against "
            f"{limit['above']:,} from 5,000 to under 5,250") in out
    assert "Round amounts, amount: " in out and "whole-unit amounts end in 00" in out
    assert "Round amounts, distance: " in out
    assert "  listed: EX-" in out and "(run.screens.thresholds)" in out
    assert "Last two digits, amount: chi-square" in out
    assert "A round amount is a lead, not a finding" in out  # each kind's caution, once


@pytest.mark.slow
def test_the_api_takes_the_same_options():
    frame = expense_claims()
    frame["amount"] = frame["amount"].str.replace("[$,]", "", regex=True).astype(float)
    result = investigator.scan(frame, id="claim", threshold={"amount": 5000}, round="amount",
                               methods="isolation")
    screens = result.run.screens
    assert screens["thresholds"][0]["below"] >= N_BELOW
    assert screens["round_amounts"]["amount"]["whole_units"] >= N_ROUND


@pytest.mark.parametrize(("args", "words"), [
    (["--threshold", "nope=5000"], ["--threshold", "'nope'", "not in the file", "columns are: claim"]),
    (["--threshold", "amount=lots"], ["--threshold", "'lots'", "not a number", "--threshold amount=5000"]),
    (["--threshold", "amount"], ["--threshold", "'amount' is not COL=VALUE"]),
    (["--threshold", "amount=5000:-5"], ["--threshold", "band width", "positive"]),
    (["--threshold", "amount=0"], ["--threshold", "needs a band width"]),
    (["--threshold", "claim=5000"], ["--threshold", "'claim'", "holds no numbers"]),
    (["--round", "nope"], ["--round", "'nope'", "not in the file"]),
    (["--digits", "nope"], ["--digits", "'nope'", "not in the file"]),
])
def test_bad_amount_options_exit_2_with_one_line(cli, claims_file, args, words):
    code, out, err = cli("scan", claims_file, "--id", "claim", "--quiet", *args)
    assert code == 2 and out == ""
    assert_one_line_error(err, *words)


@pytest.mark.slow
def test_the_dask_path_refuses_the_amount_screens(cli, claims_file, tmp_path):
    code, _, err = cli("scan", claims_file, "--engine", "dask", "--out", tmp_path / "res", "--threshold",
                       "amount=5000")
    assert code == 2
    assert_one_line_error(err, "--threshold is not available with --engine dask")


def test_columns_the_screens_cannot_read_stop_the_scan_before_it_starts():
    frame = expense_claims()
    frame["refund"] = 0.0
    with pytest.raises(investigator.InputError, match="`digits` names column 'refund', which holds no nonzero "):
        investigator.scan(frame, id="claim", digits="refund")
    # A column of zeros is a column of numbers for the other screens: their results say what is missing.
    frame = frame.iloc[:200]
    result = investigator.scan(frame, id="claim", round="refund", methods="isolation")
    assert "only 0 whole-unit amounts" in result.run.screens["round_amounts"]["refund"]["warnings"][0]
