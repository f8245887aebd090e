"""The threshold screen (checks/thresholds.py): band counts by hand, the one-sided binomial test against SciPy
and the binomial formula, planted and clean invented expense claims, and the option's parsing."""

import json
from math import comb

import numpy as np
import pytest
from scipy import stats

from investigator.checks.thresholds import band_width, parse_thresholds, threshold_test
from investigator.errors import InputError


def claims(seed: int, n: int = 2000) -> np.ndarray:
    """Invented expense claims with cents: lognormal around 800 (right-skewed, as amount columns are)."""
    return np.round(np.random.default_rng(seed).lognormal(np.log(800), 1.0, n), 2)


def test_bands_and_p_value_by_hand():
    x = [4500, 4600, 4999, 4999.99, 5000, 5100, 5499.99, 5500, 4499.99, 3000, 6200, np.nan]
    r = threshold_test(x, 5000, 500, keys=list("abcdefghijkl"))
    # By hand: below [4,500, 5,000): 4,500, 4,600, 4,999, 4,999.99 = 4; above [5,000, 5,500): 5,000 (the
    # threshold counts above), 5,100, 5,499.99 = 3; 5,500 is in the next band above, 4,499.99 in the next below.
    assert (r.below, r.above, r.next_below, r.next_above) == (4, 3, 1, 1)
    assert r.n_used == 11
    # P(X >= 4), X ~ binomial(7, 1/2) = (C(7,4) + C(7,5) + C(7,6) + C(7,7)) / 2^7 = (35 + 21 + 7 + 1) / 128 = 0.5.
    assert r.p_value == pytest.approx(64 / 128, rel=1e-12)
    assert r.p_value == pytest.approx(stats.binomtest(4, 7, 0.5, alternative="greater").pvalue, rel=1e-12)
    assert [rec["key"] for rec in r.records] == ["a", "b", "c", "d"]
    assert [rec["position"] for rec in r.records] == [0, 1, 2, 3]


def test_p_value_against_scipy_and_the_formula_on_a_larger_count():
    # 12 below, 2 above: P(X >= 12 | binomial(14, 1/2)) = (C(14,12) + C(14,13) + C(14,14)) / 2^14 = 106 / 16384.
    x = np.concatenate([np.linspace(4760, 4990, 12), [5010, 5200]])
    r = threshold_test(x, 5000)  # default band: 5% of 5,000 = 250
    assert r.width == 250 and not r.width_given
    assert (r.below, r.above) == (12, 2)
    assert r.p_value == pytest.approx((comb(14, 12) + comb(14, 13) + comb(14, 14)) / 2**14, rel=1e-12)
    assert r.p_value == pytest.approx(stats.binom.sf(11, 14, 0.5), rel=1e-12)  # SciPy's binomial upper tail


def test_planted_claims_below_an_approval_limit_are_found():
    # 30 invented claims of 4,900-4,999.99 below an approval limit of 5,000, among 2,000 ordinary claims.
    ordinary = claims(4)
    planted = np.round(np.random.default_rng(40).uniform(4900, 4999.99, 30), 2)
    x = np.concatenate([ordinary, planted])
    r = threshold_test(x, 5000, name="amount")
    assert r.p_value < 1e-4  # measured 4.6e-6: 38 below against 8 above (0.60 without the 30)
    assert set(range(2000, 2030)) <= {rec["position"] for rec in r.records}
    assert all(4750 <= rec["value"] < 5000 for rec in r.records)
    # The same claims without the planted ones: not found.
    assert threshold_test(ordinary, 5000).p_value > 0.05


def test_clean_claims_are_found_at_about_the_nominal_rate():
    # The test assumes a flat density across the bands; on right-skewed claims that holds for a narrow band.
    # Over 100 clean columns the 5% band rejects at 5% in about 5 (measured 5 of 100); a binomial(100, 0.05)
    # exceeds 11 with probability 0.4% (scipy.stats.binom.sf(11, 100, 0.05)).
    p = np.array([threshold_test(claims(s), 5000).p_value for s in range(100)])
    assert np.sum(p < 0.05) <= 11


def test_signed_values_refunds_are_not_below_the_threshold():
    r = threshold_test([-4900.0, -4950.0, 4900.0], 5000)
    assert (r.below, r.above) == (1, 0)


def test_empty_bands_and_few_records_give_warnings_not_errors():
    r = threshold_test([10.0, 20.0, 30.0], 5000, name="amount")
    assert r.p_value is None and "no amount lies within 250" in r.warnings[0] and "amount" in r.warnings[0]
    r = threshold_test([4900.0, 4950.0, 5050.0], 5000)
    assert r.p_value == pytest.approx(0.5) and "only 3 amounts" in r.warnings[0]


def test_band_width_rules():
    assert band_width(5000) == 250 and band_width(-200) == 10 and band_width(5000, 500) == 500
    with pytest.raises(InputError, match="needs a band width"):
        band_width(0)
    with pytest.raises(InputError, match="positive"):
        band_width(5000, -1)


def test_parsing_the_option():
    assert parse_thresholds("amount=5000") == (("amount", 5000.0, None),)
    assert parse_thresholds("amount=5000:500, fee=10") == (("amount", 5000.0, 500.0), ("fee", 10.0, None))
    assert parse_thresholds(["amount=5000", "amount=10000:1000"]) == (("amount", 5000.0, None),
                                                                     ("amount", 10000.0, 1000.0))
    assert parse_thresholds({"amount": 5000, "fee": (10, 2)}) == (("amount", 5000.0, None), ("fee", 10.0, 2.0))
    parsed = parse_thresholds("a=b=5")  # a column name holding '=': the value follows the last one
    assert parsed == (("a=b", 5.0, None),)
    assert parse_thresholds(parse_thresholds("amount=5000:500")) == (("amount", 5000.0, 500.0),)
    assert parse_thresholds(None) is None


@pytest.mark.parametrize(("spec", "words"), [
    ("amount", "is not COL=VALUE"),
    ("=5000", "is not COL=VALUE"),
    ("amount=", "is not COL=VALUE"),
    ("amount=abc", "'abc' in 'amount=abc' is not a number"),
    ("amount=5000:x", "band width 'x'"),
    ("amount=5000:0", "must be positive"),
    ("amount=nan", "is not a number"),
    ("amount=0", "needs a band width"),
    ("amount=5,000", "'000' is not COL=VALUE"),
    (",", "is empty"),
])
def test_malformed_thresholds_are_one_line_errors_naming_the_option(spec, words):
    with pytest.raises(InputError, match=words) as caught:
        parse_thresholds(spec)
    assert caught.value.parameters == ("threshold",) and "\n" not in str(caught.value)
    assert "`threshold`" in str(caught.value)


def test_as_dict_is_plain_json():
    d = json.loads(json.dumps(threshold_test(claims(1), 5000, name="amount").as_dict()))
    assert d["band_below"] == [4750.0, 5000.0] and d["band_above"] == [5000.0, 5250.0]
    assert d["width_from"] == "5% of the threshold" and d["column"] == "amount"
    assert set(d["records"][0]) == {"position", "row", "key", "value"}
