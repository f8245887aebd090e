"""Amounts read to the cent for the amount screens (checks/amounts.py): whole units, cents, float noise."""

import numpy as np
import pandas as pd

from investigator.checks.amounts import MAX_AMOUNT, listed_records, read_cents


def test_whole_units_and_cents():
    # By hand: 1,200.00 is 120,000 cents and a whole-unit amount; 1,234.50 is 123,450 cents with 50 cents; a
    # refund of -300 is whole (absolute value); 12.345 has a part below the cent, so it is neither.
    r = read_cents([1200.00, 1234.50, -300, 12.345, 7])
    assert r.used.tolist() == [True] * 5
    assert r.on_cent.tolist() == [True, True, True, False, True]
    assert r.whole.tolist() == [True, False, True, False, True]
    assert r.cents.tolist() == [120000, 123450, 30000, 0, 700]
    assert r.units.tolist() == [1200, 1234, 300, 12, 7]
    assert r.negative.tolist() == [False, False, True, False, False]


def test_float_noise_reads_as_the_decimal_written():
    # A computed 1,200 (1199.9999999999998, one ulp below) and 0.1 + 0.2 (0.30000000000000004) are read at 15
    # significant digits, as the decimals 1200.00 and 0.30; 1199.99 is not 1,200.
    r = read_cents([1199.9999999999998, 0.1 + 0.2, 1199.99, 4899.999999999999])
    assert r.whole.tolist() == [True, False, False, True]
    assert r.cents.tolist() == [120000, 30, 119999, 490000]


def test_left_out_values_are_counted():
    values = pd.Series([0, 0.0, np.nan, None, np.inf, "text", MAX_AMOUNT, 2e15, 5], dtype=object)
    r = read_cents(values)
    assert r.used.tolist() == [False] * 8 + [True]
    assert r.ignored == {"zero": 2, "missing": 4, "too_large": 2}


def test_nullable_integers_and_large_amounts_below_the_limit():
    r = read_cents(pd.Series([1200, None, 9_999_999_999_999], dtype="Int64"))
    assert r.whole.tolist() == [True, False, True]
    assert r.units.tolist() == [1200, 0, 9_999_999_999_999]


def test_listed_records_use_rows_and_keys():
    out = listed_records(np.array([0, 2]), np.array([1.5, 2.0, 3.0]), keys=["a", "b", "c"], rows=[10, 11, 12],
                         extra={"ending": np.array(["00", "000"])})
    assert out == [{"position": 0, "row": 10, "key": "a", "value": 1.5, "ending": "00"},
                   {"position": 2, "row": 12, "key": "c", "value": 3.0, "ending": "000"}]
    assert listed_records(np.array([1]), np.array([1.0, 2.0]))[0] == {"position": 1, "row": 2, "key": 2,
                                                                       "value": 2.0}
