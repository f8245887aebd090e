"""Benford's law screen: expected proportions, digit extraction, MAD ranges, chi-square; invented data."""

import json
import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from investigator.checks.benford import (
    MAD_RANGES,
    benford_test,
    conformity,
    digit_values,
    expected_proportions,
    leading_digits,
    mean_absolute_deviation,
    min_values_for,
)
from investigator.errors import InputError


def log_uniform(n, decades, seed):
    # Log-uniform over a whole number of decades follows Benford's law exactly (the significand's log is
    # uniform on [0, 1)), so samples of it should conform up to sampling error.
    return 10 ** np.random.default_rng(seed).uniform(0, decades, size=n)


# -- expected proportions ------------------------------------------------------------------------------

def test_expected_first_digit_proportions():
    # Benford (1938), Newcomb (1881): P(d) = log10(1 + 1/d); standard tabulated values P(1) = 0.30103,
    # P(9) = 0.04576.
    p = expected_proportions(1)
    assert digit_values(1).tolist() == list(range(1, 10))
    assert np.allclose(p, [math.log10(1 + 1 / d) for d in range(1, 10)], rtol=0, atol=1e-15)
    assert p[0] == pytest.approx(0.30103, abs=5e-6)
    assert p[-1] == pytest.approx(0.04576, abs=5e-6)
    assert p.sum() == pytest.approx(1.0, abs=1e-12)
    assert np.all(np.diff(p) < 0)


def test_expected_two_digit_proportions_sum_and_marginals():
    # P(d1 d2) = log10(1 + 1/(10 d1 + d2)); summing over the second digit telescopes to log10(1 + 1/d1).
    p2 = expected_proportions(2)
    assert digit_values(2).tolist() == list(range(10, 100))
    assert p2.sum() == pytest.approx(1.0, abs=1e-12)
    assert np.allclose(p2.reshape(9, 10).sum(axis=1), expected_proportions(1), rtol=0, atol=1e-12)
    # Standard value P(10) = log10(1.1) = 0.04139, P(99) = 0.00436 (Benford tables).
    assert p2[0] == pytest.approx(0.04139, abs=5e-6)
    assert p2[-1] == pytest.approx(0.00436, abs=5e-6)


# -- digit extraction ----------------------------------------------------------------------------------

@pytest.mark.parametrize(("value", "first", "first_two"), [
    (0.001, 1, 10),
    (1e-7, 1, 10),
    (99.99999, 9, 99),
    (9.995, 9, 99),              # stored as 9.99499999..., still 99 (truncated, never rounded to 100)
    (0.3, 3, 30),                # x / 10**floor(log10 x) gives 2.999... -> 2
    (0.0006, 6, 60),             # ... and 5.999... -> 5
    (0.1 + 0.2, 3, 30),          # 0.30000000000000004
    (1 - 1e-16, 1, 10),          # 0.9999999999999999: a computed 1, read at 15 significant digits
    (-45.6, 4, 45),              # absolute value
    (5, 5, 50),                  # one significant digit: significand 5.0
    (1234.5, 1, 12),
    (5e-324, 4, 49),             # smallest subnormal, 4.94e-324
    (1.7976931348623157e308, 1, 17),
])
def test_leading_digits_edge_cases(value, first, first_two):
    assert leading_digits([value], 1).tolist() == [first]
    assert leading_digits([value], 2).tolist() == [first_two]


def test_unusable_values_give_zero():
    values = [0, 0.0, -0.0, np.nan, np.inf, -np.inf, None, "x", "12.5", 7]
    assert leading_digits(values, 1).tolist() == [0, 0, 0, 0, 0, 0, 0, 0, 1, 7]


def test_integers_are_read_exactly():
    # 10**18 - 1 is not a float: as a float it would round to 1e18 and read as 1 / 10.
    x = np.array([10**18 - 1, -(10**17), 0, 123], dtype=np.int64)
    assert leading_digits(x, 2).tolist() == [99, 10, 0, 12]


def test_nullable_pandas_column():
    s = pd.Series([12, None, 305, 0], dtype="Int64")
    assert leading_digits(s, 1).tolist() == [1, 0, 3, 0]


def test_digits_agree_with_decimal_text_on_random_values():
    # Reference: Python's own shortest round-trip repr (a different code path from the 15-digit rounding)
    # on values with few significant digits, where both must agree.
    rng = np.random.default_rng(3)
    mant = rng.integers(100, 1000, size=2000)
    expo = rng.integers(-12, 12, size=2000)
    values = [float(f"{m}e{e}") for m, e in zip(mant, expo, strict=True)]
    expected = [int(str(m)[:2]) for m in mant]
    assert leading_digits(values, 2).tolist() == expected


# -- MAD, conformity and chi-square --------------------------------------------------------------------

def test_mad_on_a_hand_worked_example():
    values = [0.0123, 1.5, 19.99, 2, 250, 3.3e5, 0.04, 5e-7, 7.0, 9e12]
    # By hand: first digits 1,1,1,2,2,3,4,5,7,9 -> observed .3 .2 .1 .1 .1 0 .1 0 .1 (n = 10).
    # Expected (5 d.p.): .30103 .17609 .12494 .09691 .07918 .06695 .05799 .05115 .04576.
    # |deviations|: .00103 .02391 .02494 .00309 .02082 .06695 .04201 .05115 .05424, sum .28814,
    # MAD = .28814 / 9 = 0.032016.
    r = benford_test(values)
    assert r.counts.tolist() == [3, 2, 1, 1, 1, 0, 1, 0, 1]
    assert r.mad == pytest.approx(0.032016, abs=1e-5)
    assert r.conformity == "nonconformity"
    # Ten values are far too few: the result must say so.
    assert any("values used" in w for w in r.warnings)


def test_chi_square_matches_scipy():
    # Reference: scipy.stats.chisquare (Pearson's goodness of fit) on the same counts.
    x = np.random.default_rng(5).lognormal(4, 1.5, size=3000)
    for n_digits in (1, 2):
        r = benford_test(x, n_digits)
        ref = stats.chisquare(r.counts, r.n_used * expected_proportions(n_digits))
        assert r.df == (8 if n_digits == 1 else 89)
        assert r.chi2 == pytest.approx(ref.statistic, rel=1e-10)
        assert r.p_value == pytest.approx(ref.pvalue, rel=1e-8, abs=1e-300)


def test_conformity_ranges():
    # Nigrini (2012), Benford's Law: Applications for Forensic Accounting, Auditing, and Fraud Detection,
    # Wiley — thresholds as commonly cited, from memory.
    assert MAD_RANGES[1] == (("close", 0.006), ("acceptable", 0.012), ("marginal", 0.015))
    assert MAD_RANGES[2] == (("close", 0.0012), ("acceptable", 0.0018), ("marginal", 0.0022))
    assert [conformity(v, 1) for v in (0.0, 0.006, 0.0061, 0.012, 0.0149, 0.0151)] == [
        "close", "close", "acceptable", "acceptable", "marginal", "nonconformity"]
    assert [conformity(v, 2) for v in (0.0011, 0.0015, 0.002, 0.0023)] == [
        "close", "acceptable", "marginal", "nonconformity"]


def test_mad_function():
    assert mean_absolute_deviation([0.5, 0.5], [0.25, 0.75]) == pytest.approx(0.25)


# -- conforming and non-conforming data ---------------------------------------------------------------

def test_log_uniform_data_conforms():
    r1 = benford_test(log_uniform(5000, 5, seed=11), 1)
    assert r1.conformity in ("close", "acceptable")
    assert r1.warnings == []
    assert r1.orders_of_magnitude > 4.5
    r2 = benford_test(log_uniform(50_000, 5, seed=12), 2)
    assert r2.conformity in ("close", "acceptable")
    assert r2.warnings == []


def test_conformity_survives_a_change_of_units():
    # Scale invariance (Pinkham 1961): Benford data stay Benford when multiplied by a constant (a currency).
    x = log_uniform(5000, 4, seed=13)
    assert benford_test(x * 1.37).conformity in ("close", "acceptable")


def test_uniform_three_digit_amounts_do_not_conform():
    # First digits of U[100, 999] are (nearly) uniform on 1..9: MAD about 0.06, far past 0.015.
    r = benford_test(np.random.default_rng(21).uniform(100, 999, size=5000), name="amount")
    assert r.conformity == "nonconformity"
    assert r.mad > 0.05
    assert r.p_value < 1e-10
    assert any("orders of magnitude" in w and "'amount'" in w for w in r.warnings)
    r2 = benford_test(np.random.default_rng(22).uniform(100, 999, size=5000), 2)
    assert r2.conformity == "nonconformity"


# -- suitability warnings and ignored values -------------------------------------------------------------

def test_warnings_for_too_few_values_and_the_thresholds_chosen():
    # Common practice: a few hundred values for the first digit; for two digits an expected count of 5 in
    # every cell, 5 / P(99) = 5 / 0.0043648 -> 1146 values.
    assert min_values_for(1) == 300
    assert min_values_for(2) == 1146
    r = benford_test(log_uniform(200, 5, seed=1))
    assert any("only 200 values" in w for w in r.warnings)
    r = benford_test(log_uniform(800, 5, seed=1), 2)
    assert any("only 800 values" in w for w in r.warnings)
    assert not any("values used" in w for w in benford_test(log_uniform(800, 5, seed=1), 1).warnings)


def test_ignored_values_are_counted():
    x = list(log_uniform(400, 4, seed=2)) + [0, 0, np.nan, np.inf, None, "n/a"]
    r = benford_test(x, min_abs=1.0)
    below = int(np.sum(np.asarray(x[:400]) < 1.0))
    assert r.n_values == 406
    assert r.ignored == {"zero": 2, "missing": 4, "below_min": below}
    assert r.n_used == 400 - below == int(r.counts.sum())


def test_mixed_signs_warn():
    x = log_uniform(500, 4, seed=4) * np.where(np.arange(500) % 5 == 0, -1, 1)
    r = benford_test(x)
    assert any("100 negative and 400 positive" in w for w in r.warnings)


def test_no_usable_value_is_an_input_error():
    with pytest.raises(InputError, match="'refund'.*no nonzero finite values"):
        benford_test([0, np.nan, 0.0], name="refund")
    with pytest.raises(InputError):
        benford_test([1, 2, 3], n_digits=3)


# -- the records behind the excess ---------------------------------------------------------------------

def test_records_carrying_the_over_represented_digit():
    rng = np.random.default_rng(8)
    x = log_uniform(3000, 4, seed=9)
    planted = rng.choice(3000, size=150, replace=False)
    x[planted] = rng.uniform(70, 80, size=150)  # invented amounts just under an approval limit of 80
    r = benford_test(x)
    assert r.excess_digits.tolist() == [7]
    # Reference: the first character of Python's own scientific-notation text of each value.
    sevens = np.flatnonzero([f"{v:e}"[0] == "7" for v in x])
    assert r.excess_positions.tolist() == sevens.tolist()
    assert set(planted) <= set(r.excess_positions.tolist())
    assert r.excess_rows.tolist() == (sevens + 1).tolist()
    assert r.z[6] > 10  # digit 7: a large positive z
    # The two most over-represented: 7, then another digit with a positive excess.
    top2 = benford_test(x, top=2).excess_digits.tolist()
    assert top2[0] == 7 and len(top2) == 2
    assert (r.observed - r.expected)[top2[1] - 1] > 0


def test_as_dict_is_plain_json():
    r = benford_test(log_uniform(500, 3, seed=6), 2, name="amount")
    d = json.loads(json.dumps(r.as_dict(), allow_nan=False))
    assert d["test"] == "first two digits" and d["column"] == "amount" and d["df"] == 89
    assert len(d["digits"]) == len(d["observed"]) == len(d["expected"]) == 90
    assert "from memory" in d["mad_ranges_source"]
    assert "says nothing about one record alone" in d["caution"]
