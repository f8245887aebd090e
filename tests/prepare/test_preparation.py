"""Column roles and feature preparation: what is used, how it is transformed, and what is reported."""

import numpy as np
import pandas as pd
import pytest

import investigator
from investigator.prepare.features import MAD_TO_SD, quartile_skewness
from investigator.prepare.roles import infer_column


def role(values):
    return infer_column("c", pd.Series(values)).role


def test_roles_are_inferred():
    rng = np.random.default_rng(0)
    n = 200
    assert role(rng.normal(size=n)) == "numeric"
    assert role(np.arange(1, n + 1)) == "identifier"  # a counter
    assert role(np.sort(rng.integers(0, 10 * n, size=n) * 7 + 3).astype(float)) == "numeric"
    assert role([f"INV-{i:05d}" for i in range(n)]) == "identifier"
    assert role(rng.choice(["a", "b", "c"], size=n)) == "categorical"
    assert role([f"2025-03-{1 + i % 28:02d}" for i in range(n)]) == "date"
    assert role([f"left the {w} at the gate" for w in rng.choice(["box", "crate", "van"], size=n)]) == "text"
    assert role([f"{x:,.2f}" for x in rng.uniform(1000, 9000, size=n)]) == "numeric"
    assert role([np.nan] * n) == "empty"
    assert role(rng.choice([True, False], size=n)) == "categorical"


def _frame():
    rng = np.random.default_rng(1)
    n = 300
    return pd.DataFrame({
        "id": np.arange(1, n + 1),
        "amount": np.round(rng.lognormal(5, 1.0, size=n), 2),
        "temperature": rng.normal(20, 3, size=n),
        "copy": None,
        "shift": rng.choice(["day", "night"], size=n, p=[0.8, 0.2]),
        "constant": 7.0,
    }).assign(copy=lambda f: f["temperature"])


def test_roles_and_decisions_are_reported():
    result = investigator.scan(_frame())
    roles = {c.name: c.role for c in result.run.columns}
    assert roles["id"] == "identifier"
    used = {f.name: f for f in result.run.features}
    assert set(used) == {"amount", "temperature", "shift"}
    assert used["amount"].transform == "log" and "quartile skewness" in used["amount"].decision
    assert used["temperature"].transform == "none"
    assert used["shift"].transform == "rarity"
    notices = " ".join(result.run.notices)
    assert "'copy' repeats column 'temperature'" in notices
    assert "'constant' has a single value" in notices


@pytest.mark.slow
def test_features_and_exclude_override_the_inference():
    frame = _frame()
    result = investigator.scan(frame, features="id,temperature")
    assert result.features.names == ["id", "temperature"]
    result = investigator.scan(frame, exclude=["shift", "amount"])
    assert result.features.names == ["temperature"]


@pytest.mark.slow
def test_log_option():
    frame = _frame()
    assert investigator.scan(frame, log="none").features.specs[0].transform == "none"
    forced = investigator.scan(frame, log="temperature").features.specs
    assert [s.transform for s in forced[:2]] == ["none", "log"]
    with pytest.raises(investigator.InputError, match="shift"):
        investigator.scan(frame, log="shift")
    negative = frame.assign(temperature=frame["temperature"] - 100)
    with pytest.raises(investigator.InputError, match="negative"):
        investigator.scan(negative, log="temperature")


@pytest.mark.slow
def test_log_auto_leaves_symmetric_and_contaminated_columns_alone():
    rng = np.random.default_rng(2)
    x = rng.uniform(0, 3, size=200)
    x[:30] = rng.uniform(9, 12, size=30)  # contamination beyond the quartiles does not trigger a log
    assert abs(quartile_skewness(x)) < 0.3
    result = investigator.scan(pd.DataFrame({"x": x, "y": rng.normal(5, 1, size=200)}))
    assert [s.transform for s in result.features.specs] == ["none", "none"]


def test_quartile_skewness_of_a_lognormal():
    # Bowley skewness of a lognormal(0, s): (e^(zs) + e^(-zs) - 2) / (e^(zs) - e^(-zs)), z = 0.6745
    # (a closed form from the lognormal's quantiles); sample value close to it.
    s = 1.0
    z = 0.6744897501960817
    expected = (np.exp(z * s) + np.exp(-z * s) - 2) / (np.exp(z * s) - np.exp(-z * s))
    x = np.random.default_rng(3).lognormal(0, s, size=200_000)
    assert quartile_skewness(x) == pytest.approx(expected, abs=0.01)


@pytest.mark.slow
def test_robust_scaling_uses_median_and_mad():
    rng = np.random.default_rng(4)
    x = rng.normal(50, 4, size=500)
    x[:5] = 1e6  # outliers do not move the scale
    result = investigator.scan(pd.DataFrame({"x": x, "y": rng.normal(size=500)}), log="none")
    spec = result.features.specs[0]
    assert spec.center == pytest.approx(np.median(x))
    assert spec.scale == pytest.approx(np.median(np.abs(x - np.median(x))) * MAD_TO_SD)
    assert spec.scale == pytest.approx(4, rel=0.1)


def test_a_rare_category_makes_a_record_unusual():
    rng = np.random.default_rng(5)
    n = 400
    frame = pd.DataFrame({
        "x": rng.normal(size=n), "y": rng.normal(size=n),
        "currency": rng.choice(["EUR", "USD"], size=n, p=[0.6, 0.4]),
    })
    frame.loc[17, "currency"] = "XTS"
    result = investigator.scan(frame, log="none")
    j = result.features.names.index("currency")
    rarity = result.features.values[:, j]
    assert rarity[17] == pytest.approx(np.log((frame["currency"] == "EUR").mean() * n))
    assert rarity.argmax() == 17 and np.sum(rarity > 0) == 1 + (frame["currency"] == "USD").sum()
    assert result.flagged[17]


def test_missing_values_are_imputed_and_reported():
    rng = np.random.default_rng(6)
    frame = pd.DataFrame({"x": rng.normal(size=100), "y": rng.normal(size=100),
                          "kind": rng.choice(["a", "b"], size=100)})
    frame.loc[[3, 4, 50], "x"] = np.nan
    frame.loc[8, "kind"] = None
    result = investigator.scan(frame, log="none")
    assert [result.record(i)["imputed"] for i in (3, 4, 50)] == [["x"]] * 3
    assert result.features.transformed[3, 0] == pytest.approx(np.nanmedian(frame["x"]))
    notices = " ".join(result.run.notices)
    assert "'x': 3 missing values" in notices and "'kind': 1 missing value" in notices
