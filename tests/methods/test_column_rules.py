"""The per-column rules, checked against handbook constants and a hand-worked example."""

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import investigator
from investigator.prepare.features import MAD_TO_SD


def hits_of(result, rule):
    return {(i + 1, h["column"]) for i, hs in enumerate(result.column_hits) for h in hs
            if h["rule"] == rule and h["column"] == "x"}


@pytest.mark.slow
def test_three_sigma_rule_on_a_large_normal_sample():
    # 68-95-99.7 rule (common practice; standard normal table): P(|Z| > 3) = 0.0027, about 3 in 1000.
    n = 200_000
    x = np.random.default_rng(0).normal(10, 2, size=n)
    assert np.mean(np.abs(x - x.mean()) <= x.std()) == pytest.approx(0.6827, abs=0.005)
    assert np.mean(np.abs(x - x.mean()) <= 2 * x.std()) == pytest.approx(0.9545, abs=0.003)
    frame = pd.DataFrame({"x": x, "y": np.random.default_rng(1).normal(size=n)})
    result = investigator.scan(frame, methods="isolation", log="none")
    share = sum(1 for hs in result.column_hits for h in hs
                if h["column"] == "x" and h["rule"] == "three_sigma") / n
    sd = np.sqrt(0.0027 * (1 - 0.0027) / n)
    assert abs(share - 2 * stats.norm.sf(3)) < 4 * sd


def test_mad_consistency_constant():
    # Iglewicz & Hoaglin (1993), as cited by the NIST/SEMATECH e-Handbook, section 1.3.5.17 (from memory):
    # MAD x 1.4826 estimates sigma for normal data; 0.6745 is its reciprocal.
    assert pytest.approx(1.4826, abs=1e-4) == MAD_TO_SD
    assert pytest.approx(0.6745, abs=1e-4) == 1 / MAD_TO_SD
    assert pytest.approx(1 / stats.norm.ppf(0.75), rel=1e-12) == MAD_TO_SD


def _small_table(values):
    rng = np.random.default_rng(3)
    return pd.DataFrame({"x": values, "noise": rng.normal(size=len(values))})


def test_modified_z_score_threshold_by_hand():
    # Modified z-score M = 0.6745 (x - median) / MAD, flagged when |M| > 3.5 (Iglewicz & Hoaglin 1993).
    # Values 1..10 and 30: median 6, |x - 6| = 5,4,3,2,1,0,1,2,3,4,24 -> MAD 3.
    # M(30) = 0.6745 * 24 / 3 = 5.40 > 3.5; M(1) = -1.12; so only row 11 is a hit.
    values = [1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 30]
    result = investigator.scan(_small_table(values), methods="isolation", log="none")
    assert hits_of(result, "modified_z") == {(11, "x")}
    hit = next(h for h in result.column_hits[10] if h["rule"] == "modified_z")
    assert hit["limit"] == pytest.approx(6 + 3.5 * 3 / 0.6745, rel=1e-9)


def test_boxplot_fences_by_hand():
    # Tukey (1977) fences Q1 - 1.5 IQR and Q3 + 1.5 IQR, quartiles by linear interpolation (type 7).
    # Values 2, 4, 4, 5, 6, 7, 8, 9, 30 (n = 9): Q1 at position 2 -> 4, Q3 at position 6 -> 8,
    # IQR 4, fences -2 and 14: only 30 (row 9) is outside.
    values = [2, 4, 4, 5, 6, 7, 8, 9, 30]
    result = investigator.scan(_small_table(values), methods="isolation", log="none")
    assert hits_of(result, "boxplot_fence") == {(9, "x")}
    hit = next(h for h in result.column_hits[8] if h["rule"] == "boxplot_fence")
    assert hit["limit"] == pytest.approx(14.0) and hit["side"] == "upper"


def test_rules_report_limits_in_original_units_after_a_log():
    rng = np.random.default_rng(5)
    amount = np.round(rng.lognormal(4, 0.8, size=400), 2)
    amount[7] = amount.max() * 40
    frame = pd.DataFrame({"amount": amount, "other": rng.normal(size=400)})
    result = investigator.scan(frame, methods="isolation")
    assert result.features.specs[0].transform == "log"
    hit = next(h for h in result.column_hits[7] if h["rule"] == "boxplot_fence")
    assert hit["value"] == pytest.approx(amount[7])
    q1, q3 = np.quantile(np.log(amount), [0.25, 0.75])
    assert hit["limit"] == pytest.approx(np.exp(q3 + 1.5 * (q3 - q1)))


def test_infinite_and_missing_cells_are_imputed_listed_and_not_hits():
    values = [5.0, 2, 8, 4, 1, 6, 7, np.nan, 9, 3, 11, np.inf, 500]
    result = investigator.scan(_small_table(values), methods="isolation", log="none")
    assert result.record(7)["imputed"] == ["x"]
    assert result.record(11)["imputed"] == ["x"]
    assert any("infinite" in n and "row 12" in n for n in result.run.notices)
    assert (12, "x") not in hits_of(result, "boxplot_fence")
    assert (13, "x") in hits_of(result, "boxplot_fence")
