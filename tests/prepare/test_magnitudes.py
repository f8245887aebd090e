"""Preparation at the edges of floating point: robust scales that one huge value does not move, arithmetic
that does not overflow near +-1.8e308, and the compression of robust z-values beyond the bound.

References: SciPy's ``median_abs_deviation`` (scale="normal" is 1.4826 x MAD) for the robust scale; Python's
``fractions`` and ``statistics`` (exact rational arithmetic) for quantiles, means and standard deviations
of values whose float arithmetic would overflow.
"""

from __future__ import annotations

import statistics
from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from investigator.io.tables import load_table
from investigator.prepare.features import FeaturePreparer, column_scale
from investigator.prepare.magnitudes import (
    BOUND,
    FLOAT_MAX,
    SMALL,
    mean_sd,
    median,
    quantiles,
    standardise,
    unstandardise,
)
from investigator.prepare.roles import assign_roles

EXTREMES = [1e40, 1e155, 1e300, 1.7e308, -1e308, FLOAT_MAX, -FLOAT_MAX]


@pytest.mark.parametrize("huge", EXTREMES)
def test_one_huge_value_does_not_move_the_robust_scale(huge):
    rng = np.random.default_rng(0)
    x = np.round(rng.normal(14, 2.3, 2000))  # whole hours, as an entry-hour column holds
    x[17] = huge
    center, scale, rule = column_scale(x)
    # SciPy: median_abs_deviation(scale="normal") is 1.4826 x MAD, the first rule of the chain. Before, the
    # huge value made the MAD "rounding" (below 1e-12 of the largest value) and the scale its mean deviation.
    assert rule == "MAD"
    assert scale == pytest.approx(stats.median_abs_deviation(x, scale="normal"), rel=1e-12)
    assert center == np.median(x)


def test_robust_scale_of_values_near_the_float_limits_is_finite_and_equivariant():
    rng = np.random.default_rng(1)
    y = rng.normal(0, 1, 501)
    k = 1020  # y x 2^1020 reaches about 3.5 x 2^1020 = 3.9e307: deviations overflow in plain arithmetic
    center, scale, rule = column_scale(np.ldexp(y, k))
    # Multiplying by a power of two is exact, so the scale of 2^k y is exactly 2^k times SciPy's scale of y.
    assert rule == "MAD"
    assert scale == np.ldexp(stats.median_abs_deviation(y, scale="normal"), k)
    assert center == np.ldexp(np.median(y), k)


def test_values_of_both_signs_at_the_float_limits_get_a_finite_scale():
    x = np.array([FLOAT_MAX, -FLOAT_MAX] * 50 + [0.0])
    center, scale, _ = column_scale(x)
    assert np.isfinite(center) and np.isfinite(scale) and scale > 0
    z = standardise(x, center, scale)
    assert np.isfinite(z).all()


def test_quantiles_match_exact_arithmetic_where_floats_overflow():
    x = np.array([-1.7e308, -1e308, 1.5e308, 1.7e308])
    # np.quantile interpolates a + (b - a) t, and b - a = 3.2e308 overflows; Fraction is exact.
    with np.errstate(over="ignore", invalid="ignore"):
        assert not np.isfinite(np.quantile(x, 0.5))
    exact = [Fraction(v) for v in sorted(x)]
    assert quantiles(x, 0.5) == float((exact[1] + exact[2]) / 2)
    assert quantiles(x, 0.25) == float(exact[0] + (exact[1] - exact[0]) * Fraction(3, 4))


def _values(kind: str, n: int, rng) -> np.ndarray:
    if kind == "normal":
        return rng.normal(size=n)
    if kind == "ratings":
        return rng.integers(1, 6, n).astype(float)
    if kind == "zero-inflated amounts":
        return np.round(rng.lognormal(3, 1, n), 2) * (rng.random(n) < 0.4)
    if kind == "wide magnitudes":
        return rng.lognormal(0, 40, n) * rng.choice([-1.0, 1.0], n)
    if kind == "float limits":
        return rng.uniform(-1, 1, n) * 1.7e308
    return np.where(np.arange(n) == n // 2, np.nan, rng.normal(size=n))  # with a missing value


@pytest.mark.parametrize("kind", ["normal", "ratings", "zero-inflated amounts", "wide magnitudes", "float limits",
                                  "with a missing value"])
def test_the_median_of_a_few_values_is_numpys_to_the_bit(kind):
    # Reference: NumPy's np.quantile(t, 0.5) (through quantiles(), which shifts values near the float limits);
    # small arrays take a sorted shortcut that must give the same bits (peers' typical values use it).
    rng = np.random.default_rng(5)
    for n in range(1, SMALL + 8):
        for _ in range(20):
            t = _values(kind, n, rng)
            expected = float(quantiles(t, 0.5))
            assert median(t) == expected or (np.isnan(expected) and np.isnan(median(t))), (kind, n, t)


def test_mean_and_standard_deviation_match_exact_arithmetic():
    x = np.array([1e300, 2e300, -1e300, 5e299, 1.7e308])
    mean, sd = mean_sd(x)
    # statistics.mean and stdev compute with exact fractions, so they cannot overflow on squares.
    assert mean == pytest.approx(statistics.mean(x.tolist()), rel=1e-12)
    assert sd == pytest.approx(statistics.stdev(x.tolist()), rel=1e-12)


def test_standardising_is_plain_below_the_bound_and_compressed_beyond():
    center, scale = 14.0, 2.9652
    t = np.array([14.0, 20.0, -3.0, center + BOUND * scale * 0.999])
    assert np.array_equal(standardise(t, center, scale), (t - center) / scale)  # untouched
    huge = np.array([center + BOUND * scale * 1.001, 1e40, 1e155, 1e300, FLOAT_MAX])
    z = standardise(huge, center, scale)
    assert np.isfinite(z).all() and np.all(np.diff(z) > 0)  # finite, and larger values stay larger
    assert np.all(np.abs(z) < 1.6e7) and np.isfinite(z.astype(np.float32)).all()  # the forest's float32
    # Continuous with slope 1 at the bound: just past it, z is the plain value to first order.
    just = center + BOUND * scale * (1 + 1e-9)
    assert standardise(np.array([just]), center, scale)[0] == pytest.approx(BOUND * (1 + 1e-9), rel=1e-12)
    assert standardise(np.array([-FLOAT_MAX]), center, scale)[0] == pytest.approx(-z[-1], rel=1e-9)


def test_unstandardising_inverts_the_compression():
    center, scale = 3.0, 0.5
    t = np.array([3.0, 4.5, 3 + 0.5 * BOUND * 3, 1e40, -1e100, 1e300])
    back = unstandardise(standardise(t, center, scale), center, scale)
    np.testing.assert_allclose(back, t, rtol=1e-9)  # numpy's comparison, relative 1e-9 (logs lose digits)


def _prepare(frame: pd.DataFrame):
    table = load_table(frame)
    columns = assign_roles(table)
    preparer = FeaturePreparer().fit(table, columns)
    return preparer, preparer.transform(table)


def test_tiny_subnormal_and_negative_zero_values_are_prepared_as_numbers():
    rng = np.random.default_rng(2)
    n = 300
    frame = pd.DataFrame({
        "tiny": rng.normal(0, 1, n) * 1e-300,
        "subnormal": 5e-324 * rng.integers(0, 5, n),
        "signed_zero": np.where(np.arange(n) % 2, 0.0, -0.0) + (np.arange(n) == 7),
        "other": rng.normal(0, 1, n),
    })
    preparer, features = _prepare(frame)
    assert np.isfinite(features.values).all()
    tiny = features.names.index("tiny")
    # The same robust z as for the column times 1e300 (SciPy's MAD): scaling by a constant changes nothing.
    expected = (frame["tiny"] - frame["tiny"].median()) / stats.median_abs_deviation(frame["tiny"], scale="normal")
    np.testing.assert_allclose(features.values[:, tiny], expected, rtol=1e-9)
    zero = features.values[:, features.names.index("signed_zero")]
    assert not np.signbit(zero[zero == 0]).any()  # -0.0 and 0.0 are one value to every method


def test_the_run_record_gives_the_bound_and_the_records_beyond_it():
    rng = np.random.default_rng(3)
    frame = pd.DataFrame({"hour": np.round(rng.normal(14, 2.3, 400)), "km": rng.normal(50, 5, 400)})
    frame.loc[12, "hour"] = 1e300
    preparer, features = _prepare(frame)
    spec = preparer.specs_[0].as_dict()
    assert spec["bound"] == BOUND and spec["beyond_bound"] == 1
    assert np.argmax(features.values[:, 0]) == 12 and np.abs(features.values).max() < 1.6e7
