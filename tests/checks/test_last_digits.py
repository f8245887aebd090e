"""Nigrini's last-two-digits test (checks/last_digits.py): the digits read, the chi-square statistic by hand and
against SciPy, planted and clean invented amounts, and data as users have it."""

import json

import numpy as np
import pytest
from scipy import stats

from investigator.checks.last_digits import MIN_VALUES, last_two_digits


def claims(seed: int, n: int = 2000) -> np.ndarray:
    """Invented whole-unit claims, lognormal around 800 (under 2% below 100)."""
    return np.maximum(np.rint(np.random.default_rng(seed).lognormal(np.log(800), 1.0, n)), 1)


def test_digits_and_chi_square_by_hand():
    # The tens and units of the whole-unit part, amounts of 10 or more (Nigrini 2012, from memory):
    # 10 -> 10, 110 -> 10, 210 -> 10, 11 -> 11, 12 -> 12, 1,234.56 -> 34, 99.99999999999999 (a computed 100)
    # -> 00; 5 is below 10 and 0 is a zero: both left out. n = 7, expected 7/100 = 0.07 per pair.
    x = [10, 110, 210, 11, 12, 1234.56, 99.99999999999999, 5, 0]
    r = last_two_digits(x, keys=list("abcdefghi"))
    assert r.n_used == 7 and r.ignored["below_10"] == 1 and r.ignored["zero"] == 1
    expected_counts = np.zeros(100, dtype=int)
    expected_counts[[10, 11, 12, 34, 0]] = [3, 1, 1, 1, 1]
    assert r.counts.tolist() == expected_counts.tolist()
    # By hand: chi2 = sum (O - E)^2 / E = [(3 - 0.07)^2 + 4 (1 - 0.07)^2 + 95 (0 - 0.07)^2] / 0.07
    #         = (8.5849 + 3.4596 + 0.4655) / 0.07 = 12.51 / 0.07 = 178.714...
    assert r.chi2 == pytest.approx(12.51 / 0.07, rel=1e-12)
    ref = stats.chisquare(expected_counts)  # SciPy's Pearson chi-square against the uniform expectation
    assert r.chi2 == pytest.approx(ref.statistic, rel=1e-12) and r.p_value == pytest.approx(ref.pvalue, rel=1e-12)
    assert r.df == 99
    # The largest excess is 10 (2.93); the next three places tie (0.93), and every tie is kept.
    assert r.excess_pairs.tolist() == [10, 0, 11, 12, 34]
    assert [rec["key"] for rec in r.records] == list("abcdefg")
    assert r.records[5]["pair"] == "34" and r.records[6]["pair"] == "00"
    assert any(f"at least {MIN_VALUES}" in w for w in r.warnings)


def test_chi_square_matches_scipy_on_claims():
    r = last_two_digits(claims(3))
    ref = stats.chisquare(r.counts, np.full(100, r.n_used / 100))  # SciPy, explicit uniform expectation
    assert r.chi2 == pytest.approx(ref.statistic, rel=1e-12)
    assert r.p_value == pytest.approx(stats.chi2.sf(ref.statistic, 99), rel=1e-9)  # SciPy chi2, df = 99
    assert r.warnings == []


def test_planted_endings_are_found_and_clean_amounts_are_not():
    ordinary = claims(6)
    assert last_two_digits(ordinary).p_value > 0.05
    # 80 invented claims kept just under round sums (1,499, 2,999, ...): the pair 99 is over-represented.
    planted = np.random.default_rng(60).integers(5, 60, 80) * 100 - 1.0
    x = np.concatenate([ordinary, planted])
    r = last_two_digits(x)
    assert r.p_value < 1e-10 and r.excess_pairs[0] == 99
    listed = {rec["position"] for rec in r.records if rec["pair"] == "99"}
    assert set(range(2000, 2080)) <= listed


def test_clean_amounts_are_found_at_about_the_nominal_rate():
    # Over 100 clean columns the test rejects at 5% in about 5 (measured: 9 of 100 here, 6.8% over 500
    # columns); a binomial(100, 0.05) exceeds 11 with probability 0.4% (scipy.stats.binom.sf(11, 100, 0.05)).
    p = np.array([last_two_digits(claims(s)).p_value for s in range(100)])
    assert np.sum(p < 0.05) <= 11


def test_a_fixed_fee_repeated_shows_as_its_pair():
    # 300 exact copies of a fee of 45.00 among 2,000 claims: the pair 45 leads, its records are listed.
    x = np.concatenate([claims(8), np.full(300, 45.0)])
    r = last_two_digits(x)
    assert r.excess_pairs[0] == 45 and r.p_value < 1e-10
    assert set(range(2000, 2300)) <= {rec["position"] for rec in r.records}


def test_zeros_small_amounts_and_no_usable_amount():
    r = last_two_digits(np.concatenate([np.zeros(500), claims(2)]))
    assert r.ignored["zero"] == 500 and r.n_used == 2000
    r = last_two_digits([0, 3, 7.5, np.nan], name="tip")
    assert r.chi2 is None and r.p_value is None and r.records == []
    assert "tip" in r.warnings[0] and "not run" in r.warnings[0]
    # Mostly two-digit amounts: their last two digits are their first two; a warning says so.
    r = last_two_digits(np.random.default_rng(1).integers(10, 100, 600))
    assert any("below 100" in w for w in r.warnings)


def test_as_dict_is_plain_json():
    d = json.loads(json.dumps(last_two_digits(claims(1), name="amount").as_dict()))
    assert d["pairs"][:3] == ["00", "01", "02"] and len(d["counts"]) == 100 and d["expected"] == 0.01
    assert d["column"] == "amount" and "from memory" in d["source"]
    empty = json.loads(json.dumps(last_two_digits([1.0, 2.0]).as_dict()))
    assert empty["chi2"] is None and empty["observed"][0] is None
