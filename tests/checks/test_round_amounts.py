"""The round-amount screen (checks/round_amounts.py): the expected share against hand computations, the test
against SciPy's binomial distribution, planted and clean invented claims, and data as users have it."""

import json
from math import comb

import numpy as np
import pytest
from scipy import stats

from investigator.checks.round_amounts import MIN_AMOUNTS, round_amounts


def claims(seed: int, n: int = 2000) -> np.ndarray:
    """Invented expense claims in whole units: lognormal around 800 (a right-skewed amount column)."""
    return np.maximum(np.rint(np.random.default_rng(seed).lognormal(np.log(800), 1.0, n)), 1)


def upper_tail(k: int, n: int, p: float) -> float:
    """P(X >= k) for X ~ binomial(n, p), summed term by term (the textbook formula)."""
    return sum(comb(n, i) * p**i * (1 - p) ** (n - i) for i in range(k, n + 1))


def test_expected_share_over_a_few_hundred_by_hand():
    # Whole amounts 1..350 once each, plus four more claims of 200 and two of 300.
    # By hand: the multiples of 100 in 1..350 are 100, 200, 300. Around each, the window km-50..km+50 holds
    # 100 amounts not ending in 00, the two ends weighing 1/2: 99 amounts over 99 whole units, one per unit,
    # so each multiple expects 1 and E_100 = 3. The 347 amounts not ending in 00 and E_100 = 3 give
    # p_100 = 3 / (347 + 3) = 3/350 (not 1/100: the range holds only three multiples). No multiple of 1,000 lies
    # in the range: p_1000 = 0. Round: 100, 200 x 5, 300 x 3 = 9 of 356.
    x = np.concatenate([np.arange(1, 351), [200] * 4, [300] * 2])
    r = round_amounts(x)
    assert (r.n_whole, r.n_other) == (356, 347)
    lv = r.level(100)
    assert lv.count == 9 and lv.share == pytest.approx(9 / 356)
    assert lv.expected_share == pytest.approx(3 / 350, rel=1e-12)
    assert lv.expected_count == pytest.approx(356 * 3 / 350, rel=1e-12)
    # One-sided exact binomial test: SciPy's binomial upper tail P(X >= 9) = binom.sf(8, ...), and the same tail
    # summed by hand from the binomial formula.
    assert lv.p_value == pytest.approx(stats.binom.sf(8, 356, 3 / 350), rel=1e-9)
    assert lv.p_value == pytest.approx(upper_tail(9, 356, 3 / 350), rel=1e-9)
    assert lv.p_value == pytest.approx(0.0040525, abs=1e-6)  # scipy.stats.binomtest(9, 356, 3/350, "greater")
    thousand = r.level(1000)
    assert (thousand.count, thousand.expected_share, thousand.p_value) == (0, 0.0, 1.0)
    assert [rec["value"] for rec in r.records] == [100, 200, 300] + [200] * 4 + [300] * 2
    assert {rec["ending"] for rec in r.records} == {"00"}


def test_the_window_is_cut_at_the_range_and_multiples_outside_expect_nothing():
    # Whole amounts 120..480 once each. By hand: 100 and 500 lie outside the range (expect 0); 200, 300 and 400
    # have full windows, one per unit each: E_100 = 3, N_other = 361 - 3 = 358, p_100 = 3 / 361, which is the
    # true share of multiples of 100 among 361 equally likely whole amounts. (1/100 would overstate it.)
    r = round_amounts(np.arange(120, 481))
    assert r.level(100).expected_share == pytest.approx(3 / 361, rel=1e-12)
    # A floor at a round amount: 100..400 once each. The window of 100 is cut at 100: 101..150 hold 50 amounts
    # over 49.5 units (150 weighs 1/2), one per unit; E_100 = 4 over 297 + 4 amounts = 4/301.
    r = round_amounts(np.arange(100, 401))
    assert r.level(100).expected_share == pytest.approx(4 / 301, rel=1e-12)


def test_thousands_expect_one_in_a_thousand_on_a_wide_flat_range():
    # Whole amounts 1..20,000 once each. By hand: every window is full and flat, one amount per unit, so
    # E_100 = 200 and E_1000 = 20 (the multiples in range), N_other = 19,800: p_1000 = 20 / 20,000 = 1/1,000
    # and p_100 = 200 / 20,000 = 1/100, the shares of a uniform whole amount.
    r = round_amounts(np.arange(1, 20001))
    assert r.level(100).expected_share == pytest.approx(0.01, rel=1e-12)
    assert r.level(1000).expected_share == pytest.approx(0.001, rel=1e-12)
    assert r.level(100).count == 200 and r.level(1000).count == 20


def test_planted_round_claims_are_found_and_clean_claims_are_not():
    ordinary = claims(1)  # one clean column; the rate over many is the next test's
    clean = round_amounts(ordinary)
    assert clean.level(100).p_value > 0.05 and clean.level(1000).p_value > 0.05
    # 60 invented claims written as round sums (200, 300, ..., 3,000) among the 2,000 ordinary ones.
    planted = np.random.default_rng(8).integers(2, 31, 60) * 100
    x = np.concatenate([ordinary, planted])
    r = round_amounts(x, keys=[f"C{i:04d}" for i in range(len(x))])
    assert r.level(100).p_value < 1e-10
    listed = {rec["position"] for rec in r.records}
    assert set(range(2000, 2060)) <= listed  # every planted claim is listed
    assert listed == set(np.flatnonzero(x % 100 == 0).tolist())
    assert r.records[-1]["key"] == "C2059"


def test_clean_claims_are_flagged_at_about_the_nominal_rate():
    # The expected share is our construction; over 100 clean columns of 2,000 claims the test should reject at
    # 5% in about 5% of them (measured: 3% at 00, 4% at 000). A binomial(100, 0.05) exceeds 11 with
    # probability 0.4% (scipy.stats.binom.sf(11, 100, 0.05)), so more than 11 means the expectation is off.
    p00 = np.array([round_amounts(claims(s)).level(100).p_value for s in range(100)])
    p000 = np.array([round_amounts(claims(s)).level(1000).p_value for s in range(100)])
    assert np.sum(p00 < 0.05) <= 11 and np.sum(p000 < 0.05) <= 11


def test_zero_inflated_amounts_leave_the_zeros_out():
    # 1,000 zero claims (nothing paid) among 2,000: the zeros are counted apart and change nothing.
    base = claims(3)
    r0 = round_amounts(base)
    r = round_amounts(np.concatenate([np.zeros(1000), base]))
    assert r.ignored["zero"] == 1000 and r.n_whole == 2000
    assert r.level(100).p_value == r0.level(100).p_value
    assert [rec["position"] - 1000 for rec in r.records] == [rec["position"] for rec in r0.records]


def test_many_copies_of_a_fixed_fee_that_is_not_round():
    # 400 copies of a fixed fee of 4,320 among 2,000 claims: a spike next to 4,300 raises that window's mean
    # by 400 / 99 but is no round amount, so the column is not found round.
    r = round_amounts(np.concatenate([claims(5), np.full(400, 4320.0)]))
    assert r.level(100).p_value > 0.05
    # The same 400 copies at 4,300 are round amounts, and found.
    assert round_amounts(np.concatenate([claims(5), np.full(400, 4300.0)])).level(100).p_value < 1e-10


def test_cents_are_never_round_and_whole_amounts_of_a_cents_column_are_tested():
    # 1,200.00 is round; 1,234.50 and 1,200.50 are not. Among 1,000 amounts with cents and 500 whole ones,
    # only the 500 whole ones are the test population.
    r = round_amounts([1200.00, 1234.50, 1200.50, 12.345])
    assert [rec["value"] for rec in r.records] == [1200.0]
    assert (r.n_used, r.n_whole) == (4, 1)
    rng = np.random.default_rng(11)
    with_cents = rng.integers(10, 3000, 1000) + rng.integers(1, 100, 1000) / 100  # cents 01..99
    whole = claims(11, 500)
    r = round_amounts(np.concatenate([with_cents, whole]))
    assert r.n_whole == 500 and r.as_dict()["with_cents"] == 1000


def test_too_few_whole_amounts_give_a_warning_and_no_test():
    r = round_amounts(claims(1, MIN_AMOUNTS - 1), name="fee")
    assert all(lv.p_value is None and lv.expected_share is None for lv in r.levels)
    assert r.warnings and "fee" in r.warnings[0] and f"at least {MIN_AMOUNTS}" in r.warnings[0]
    # Amounts far from any multiple of 100: nothing to expect, and nothing round.
    r = round_amounts(np.arange(1, 50).repeat(2))
    assert r.level(100).expected_share == 0.0 and r.level(100).p_value == 1.0
    # Every amount a multiple of 100 (a column of fixed round fees): no neighbours to read the density from.
    r = round_amounts(np.full(80, 500.0))
    assert r.level(100).count == 80 and r.level(100).p_value is None
    assert any("nothing to" in w for w in r.warnings)


def test_mixed_signs_warn_and_the_result_is_plain_json():
    r = round_amounts(np.concatenate([claims(2), -claims(3, 100)]), name="amount")
    assert any("negative" in w for w in r.warnings)
    d = json.loads(json.dumps(r.as_dict()))
    assert d["column"] == "amount" and [lv["ending"] for lv in d["levels"]] == ["00", "000"]
    assert set(d["records"][0]) == {"position", "row", "key", "value", "ending"}
