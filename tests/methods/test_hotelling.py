"""Hotelling T-squared against a reference: control limits, false-alarm rates, T2 and its Shapley split."""


import numpy as np
import pytest
from scipy import stats

from fixtures.shapley import shapley_values
from investigator.errors import InputError
from investigator.methods.hotelling import Hotelling, phase_i_limit, phase_ii_limit

# An invented in-control process with correlated features (3 features, positive definite covariance).
MU = np.array([10.0, -2.0, 50.0])
SIGMA = np.array([[4.0, 1.2, -0.8],
                  [1.2, 1.0, 0.3],
                  [-0.8, 0.3, 2.5]])


def draw(rng, n):
    return rng.multivariate_normal(MU, SIGMA, size=n)


# -- the limits ------------------------------------------------------------------------------------------

def test_limits_at_m30_p3_alpha001():
    # Hand-checked case m = 30, p = 3, alpha = 0.01:
    #   phase I:  (29^2 / 30) * Beta(0.99; 1.5, 13)  = 28.03333 * 0.348529 = 9.77044
    #   phase II: 3 * 31 * 29 / (900 - 90) * F(0.99; 3, 27) = 3.329630 * 4.600907 = 15.31932
    # F(0.99; 3, 27) = 4.60 is also the value in standard F tables (from memory).
    m, p, a = 30, 3, 0.01
    assert stats.f.ppf(0.99, 3, 27) == pytest.approx(4.60, abs=0.005)
    assert phase_i_limit(m, p, a) == pytest.approx(
        (m - 1) ** 2 / m * stats.beta.ppf(1 - a, p / 2, (m - p - 1) / 2), rel=1e-12)
    assert phase_ii_limit(m, p, a) == pytest.approx(
        p * (m + 1) * (m - 1) / (m**2 - m * p) * stats.f.ppf(1 - a, p, m - p), rel=1e-12)
    assert phase_i_limit(m, p, a) == pytest.approx(9.77044, abs=1e-5)
    assert phase_ii_limit(m, p, a) == pytest.approx(15.31932, abs=1e-5)


@pytest.mark.parametrize(("m", "p", "alpha"),
                         [(30, 3, 0.05), (50, 2, 0.0027), (20, 5, 0.01), (200, 10, 0.025)])
def test_limits_equal_the_formulas(m, p, alpha):
    # Tracy, Young & Mason (1992) and Montgomery, evaluated directly with scipy.stats.beta.ppf / f.ppf.
    ucl1 = (m - 1) ** 2 / m * stats.beta.ppf(1 - alpha, p / 2, (m - p - 1) / 2)
    ucl2 = p * (m + 1) * (m - 1) / (m * m - m * p) * stats.f.ppf(1 - alpha, p, m - p)
    assert phase_i_limit(m, p, alpha) == pytest.approx(ucl1, rel=1e-12)
    assert phase_ii_limit(m, p, alpha) == pytest.approx(ucl2, rel=1e-12)
    # Independent route for phase I: if F ~ F(2a, 2b) then aF / (aF + b) ~ Beta(a, b), so the beta quantile
    # is r F / (1 + r F) with r = p / (m - p - 1) and F = F(1 - alpha; p, m - p - 1).
    f = stats.f.ppf(1 - alpha, p, m - p - 1)
    r = p / (m - p - 1)
    assert phase_i_limit(m, p, alpha) == pytest.approx((m - 1) ** 2 / m * r * f / (1 + r * f), rel=1e-9)
    # Both tend to the chi-square quantile as m grows; for finite m the phase II limit lies above it.
    assert ucl2 > stats.chi2.ppf(1 - alpha, p)


def test_limits_approach_chi_square_for_a_long_reference():
    # As m -> infinity both limits tend to chi2(1 - alpha; p) (Montgomery).
    q = stats.chi2.ppf(0.99, 4)
    assert phase_i_limit(100_000, 4, 0.01) == pytest.approx(q, rel=1e-3)
    assert phase_ii_limit(100_000, 4, 0.01) == pytest.approx(q, rel=1e-3)


def test_fitted_cutoff_is_the_phase_ii_limit():
    X = draw(np.random.default_rng(0), 40)
    h = Hotelling(cutoff=0.99).fit(X)
    assert h.key == "hotelling"
    assert (h.m_, h.p_) == (40, 3)
    assert h.cutoff_ == pytest.approx(phase_ii_limit(40, 3, 0.01), rel=1e-12)
    assert h.phase_i_limit_ == pytest.approx(phase_i_limit(40, 3, 0.01), rel=1e-12)
    d = h.describe()
    assert d["parameters"]["phase_ii_limit"] == h.cutoff_ and d["parameters"]["alpha"] == 0.01
    # The standardised value is the normal quantile of the phase II probability: z(cutoff) = z_0.99, so the
    # unified score is 0.98 = 2q - 1 at the cutoff, as for the other methods.
    assert h.standardise(np.array([h.cutoff_]))[0] == pytest.approx(stats.norm.ppf(0.99), rel=1e-9)
    assert h.unify(np.array([h.cutoff_]))[0] == pytest.approx(0.98, rel=1e-9)


# -- false alarms on in-control data ---------------------------------------------------------------------

def binomial_band(rate, trials, sigmas=4.0):
    half = sigmas * np.sqrt(rate * (1 - rate) / trials)
    return rate - half, rate + half


@pytest.mark.slow
def test_phase_ii_false_alarm_rate_is_alpha():
    # Each repetition: a fresh reference of m = 25 records and one new record from the same distribution,
    # so the repetitions are independent and the alarms binomial(reps, alpha). 4-sigma band.
    rng = np.random.default_rng(2024)
    reps, m, alpha = 4000, 25, 0.05
    alarms = chi2_alarms = 0
    chi2_limit = stats.chi2.ppf(1 - alpha, 3)
    for _ in range(reps):
        h = Hotelling(cutoff=1 - alpha).fit(draw(rng, m))
        t2 = h.score(draw(rng, 1))[0]
        alarms += bool(h.flags(np.array([t2]))[0])
        chi2_alarms += t2 > chi2_limit
    lo, hi = binomial_band(alpha, reps)
    assert lo < alarms / reps < hi
    # The test can tell: the large-sample chi-square limit gives too many false alarms at m = 25.
    assert chi2_alarms / reps > hi


@pytest.mark.slow
def test_phase_i_false_alarm_rate_is_alpha():
    # Phase I: a reference record against its own reference. One record per reference keeps the repetitions
    # independent; binomial 4-sigma band.
    rng = np.random.default_rng(7)
    reps, m, alpha = 4000, 20, 0.05
    alarms = 0
    for _ in range(reps):
        h = Hotelling(cutoff=1 - alpha).fit(draw(rng, m))
        alarms += bool(h.reference_flags()[0])
    lo, hi = binomial_band(alpha, reps)
    assert lo < alarms / reps < hi


# -- T2 and contributions --------------------------------------------------------------------------------

def test_reference_t2_equals_direct_numpy():
    X = draw(np.random.default_rng(1), 60)
    h = Hotelling().fit(X)
    # Direct: mean, np.cov (ddof = 1) and an explicit inverse.
    D = X - X.mean(axis=0)
    P = np.linalg.inv(np.cov(X.T, ddof=1))
    direct = np.array([d @ P @ d for d in D])
    assert np.allclose(h.reference_scores_, direct, rtol=1e-10, atol=0)
    # A known identity: the reference records' T2 sum to (m - 1) p.
    assert h.reference_scores_.sum() == pytest.approx((60 - 1) * 3, rel=1e-10)
    new = draw(np.random.default_rng(2), 5)
    assert np.allclose(h.score(new), [(x - X.mean(0)) @ P @ (x - X.mean(0)) for x in new], rtol=1e-10)


def test_contributions_are_shapley_values():
    rng = np.random.default_rng(4)
    p = 4
    A = rng.normal(size=(p, p))
    X = rng.normal(size=(80, p)) @ A  # correlated features
    h = Hotelling().fit(X)
    x = rng.normal(size=p) * 3 + h.mean_
    phi = h.contributions(x)[0]
    t2 = h.score(x[None, :])[0]
    assert phi.sum() == pytest.approx(t2, rel=1e-12)

    def v(coalition):
        # The game: T2 of x with the features outside the coalition set to the reference mean.
        z = h.mean_.copy()
        z[list(coalition)] = x[list(coalition)]
        return h.score(z[None, :])[0]

    # Shapley (1953), by enumeration of every coalition.
    shapley = shapley_values(v, p)
    assert np.allclose(phi, shapley, rtol=0, atol=1e-9)


def test_columns_subset():
    X = draw(np.random.default_rng(5), 50)
    h = Hotelling(columns=np.array([0, 2])).fit(X)
    ref = Hotelling().fit(X[:, [0, 2]])
    assert h.p_ == 2
    assert np.allclose(h.reference_scores_, ref.reference_scores_)
    assert h.contributions(X[:3]).shape == (3, 2)


# -- degenerate references -------------------------------------------------------------------------------

def test_singular_covariance_is_regularised_with_a_notice():
    rng = np.random.default_rng(6)
    parts = rng.normal(10, 2, size=(40, 2))
    X = np.column_stack([parts, parts.sum(axis=1)])  # the total is exactly the sum of its parts
    h = Hotelling().fit(X)
    assert h.singular_ and h.ridge_ > 0
    assert len(h.notices_) == 1 and "singular" in h.notices_[0]
    assert np.all(np.isfinite(h.reference_scores_))
    good = np.array([[10.5, 9.0, 19.5]])
    broken = np.array([[10.5, 9.0, 20.5]])  # a total off by 1
    assert h.score(good)[0] < h.cutoff_
    assert h.score(broken)[0] > 1000 * h.cutoff_
    # Non-singular data: no ridge, no notice.
    ok = Hotelling().fit(draw(rng, 40))
    assert not ok.singular_ and ok.ridge_ == 0.0 and ok.notices_ == []


def test_too_short_a_reference_is_an_input_error():
    with pytest.raises(InputError, match="at least 5 reference records"):
        Hotelling().fit(np.random.default_rng(0).normal(size=(4, 3)))
    with pytest.raises(InputError, match="at least 4"):
        phase_ii_limit(3, 3, 0.05)
    with pytest.raises(InputError, match="alpha"):
        phase_i_limit(30, 3, 1.5)
