"""Explanations that read right, on invented purchase-order lines (fixtures/purchase_orders.py) and the demo:
direction words only outside the typical range, shares of what pushes a record out, changes that keep each
column's kind, typical ranges within the record's own category, large shares never called typical.

References: pandas (quantiles with its default linear interpolation, groupby, min/max, whole-number checks)
computed on the table as read, independently of the explanation's code."""

import re

import numpy as np
import pandas as pd
import pytest

import investigator
from fixtures.purchase_orders import LATE_HOUR, LOW_APPROVER, OFFICE_PRICE, QUANTITY_BREAK, make_purchase_orders
from investigator.explain.explanation import TypicalLevel, TypicalRange
from investigator.explain.nearest import nearest_ordinary
from investigator.explain.typical import MIN_GROUP, build_typical
from investigator.output.explanation import direction_text, explanation_text, headline_text

pytestmark = pytest.mark.slow  # a scan of 3,000 lines and the explanations of every flagged one

WHOLE = ("quantity", "approver_level", "submitted_hour")


@pytest.fixture(scope="module")
def orders():
    frame = make_purchase_orders()
    result = investigator.scan(frame, id="line_id")
    return frame, result, result.explainer.flagged()


def ordinary(frame, result):
    return frame[~result.flagged]


def pandas_range(frame, result, t: TypicalRange, column: str) -> tuple[float, float, float]:
    """Quartiles and median by pandas over the ordinary records the range says it was computed on."""
    base = ordinary(frame, result)
    if t.group is not None:
        base = base[base[t.group].astype(str) == t.level]
    q = base[column].quantile([0.25, 0.5, 0.75])
    return float(q.iloc[0]), float(q.iloc[1]), float(q.iloc[2])


def check_directions(frame, result, explanations) -> int:
    """Every top feature of every explanation: higher / lower exactly when outside its typical range (pandas),
    and no direction word in the text for a value inside it; large shares never "within" / "common"."""
    checked = 0
    for e in explanations:
        text = explanation_text(e)
        for t in e.top_features:
            if t.share >= 0.25:
                assert t.direction not in ("within", "common", "typical"), (e.row, t)
            if not isinstance(t.typical, TypicalRange) or t.value is None:
                continue
            q1, med, q3 = pandas_range(frame, result, t.typical, t.feature)
            assert (t.typical.q1, t.typical.median, t.typical.q3) == pytest.approx((q1, med, q3), rel=1e-9)
            inside = q1 <= t.value <= q3
            assert (t.direction in ("higher", "lower")) == (not inside), (e.row, t)
            if inside:
                assert f"{t.feature} is higher" not in text and f"{t.feature} is lower" not in text
                assert "than typical" not in direction_text(t)
            else:
                assert t.direction == ("higher" if t.value > q3 else "lower")
            checked += 1
    return checked


def test_direction_words_only_outside_the_typical_range_across_all_flagged_lines(orders):
    frame, result, flagged = orders
    assert check_directions(frame, result, flagged.values()) > 3 * len(flagged)


def test_shares_are_of_what_pushes_the_record_out(orders):
    _, _, flagged = orders
    for e in flagged.values():
        for key, items in e.contributions.items():
            pushing = [c for c in items if c.value > 0]
            if pushing:  # shares of the positive contributions add up to 100% (+- 0.5 points)
                assert sum(c.share for c in pushing) == pytest.approx(1.0, abs=0.005), (e.row, key)
            assert all(c.share >= 0 for c in items)
            assert all(c.share == 0 for c in items if c.value < 0)
        assert sum(t.share for t in e.top_features) <= 1 + 1e-9
        text = explanation_text(e)
        assert not re.search(r"-\d+%", text), text  # no negative percentage anywhere in the text
        if any(e.pulling(k) for k in e.contributions):
            assert "look more ordinary" in text


def test_the_change_keeps_whole_numbers_whole_and_values_in_the_ordinary_range(orders):
    frame, result, flagged = orders
    base = ordinary(frame, result)
    whole = {c for c in frame.columns if pd.api.types.is_numeric_dtype(frame[c]) and (base[c] % 1 == 0).all()}
    assert set(WHOLE) <= whole and "unit_price" not in whole
    seen = 0
    for e in flagged.values():
        n = e.nearest_ordinary
        if n is None:
            continue
        for c in n.changes:
            low, high = float(base[c.feature].min()), float(base[c.feature].max())
            assert low <= c.after <= high, (e.row, c)
            if c.feature in whole:
                assert c.after == int(c.after), (e.row, c)
                seen += 1
        assert (n.distance_after <= n.cutoff) == n.reaches_cutoff
        said = explanation_text(e)
        if not n.reaches_cutoff:
            assert "No change within the observed range of ordinary records" in said
    assert seen >= 2  # whole-number columns do drive some changes here
    # The planted low approver: the change is to approver level 2, a whole level, and it reaches the cutoff.
    e = flagged[LOW_APPROVER - 1]
    assert [(c.feature, c.before, c.after) for c in e.nearest_ordinary.changes] == [("approver_level", 1, 2)]
    assert e.nearest_ordinary.reaches_cutoff


def test_a_change_preferring_given_columns_stays_whole(orders):
    # The hook for cell findings: with quantity preferred, the broken line (amount 160 for 38 x 40) is brought
    # back by a whole quantity within the ordinary range; without it, amount is the cheaper change.
    frame, result, _ = orders
    i = QUANTITY_BREAK - 1
    bounds = result.explainer.typical.bounds
    free = nearest_ordinary(result, i, bounds)
    preferred = nearest_ordinary(result, i, bounds, prefer_columns=["quantity"])
    assert [c.feature for c in free.changes] == ["amount"]
    assert [c.feature for c in preferred.changes] == ["quantity"] and preferred.reaches_cutoff
    after = preferred.changes[0].after
    base = ordinary(frame, result)
    assert after == int(after) and base["quantity"].min() <= after < 38


def test_typical_values_are_those_of_the_record_s_own_category(orders):
    frame, result, flagged = orders
    e = flagged[OFFICE_PRICE - 1]
    price = next(t for t in e.top_features if t.feature == "unit_price")
    assert price.direction == "higher" and price.value == 1308
    t = price.typical
    assert (t.group, t.level) == ("category", "office supplies")
    # pandas: groupby quantiles of the ordinary lines of that category.
    q = ordinary(frame, result).groupby("category")["unit_price"].quantile([0.25, 0.5, 0.75])["office supplies"]
    assert (t.q1, t.median, t.q3) == pytest.approx(tuple(q), rel=1e-12)
    assert t.records == int((ordinary(frame, result)["category"] == "office supplies").sum())
    overall = ordinary(frame, result)["unit_price"].quantile(0.75)
    assert t.q3 < overall  # the overall range is far wider: the category's own is the one that says "high"
    assert "for category = office supplies" in headline_text(e)
    d = price.to_dict()["typical"]
    assert (d["group"], d["level"], d["records"]) == ("category", "office supplies", t.records)


def test_a_category_with_too_few_ordinary_records_falls_back_to_the_overall_range(orders):
    frame, result, _ = orders
    F = result.features
    members = np.flatnonzero(~result.flagged)
    software = members[frame["category"].to_numpy()[members] == "software"]
    kept = np.setdiff1d(members, software[MIN_GROUP - 1:])  # 19 software lines left: one fewer than needed
    typical = build_typical(F, kept)
    j = F.names.index("unit_price")
    i = int(software[0])
    t = typical.of(F, i, j)
    assert t.group is None and "only 19 ordinary records with category = software" in t.note
    q = frame["unit_price"].iloc[kept].quantile([0.25, 0.75])
    assert (t.q1, t.q3) == pytest.approx(tuple(q), rel=1e-12)


def test_a_large_share_is_never_called_typical_in_the_planted_cases(orders):
    _, _, flagged = orders
    e = flagged[LOW_APPROVER - 1]
    approver = next(t for t in e.top_features if t.feature == "approver_level")
    assert approver.share >= 0.25 and approver.direction in ("lower", "combination")
    assert "approver_level is lower than typical" in headline_text(e)
    office = flagged[OFFICE_PRICE - 1]
    category = office.top_features[0]
    # A common level carrying the largest share: its share comes from the combination with the price.
    assert category.feature == "category" and category.direction == "combination"
    assert category.with_feature == "unit_price"
    assert "category is unusual in combination with unit_price" in headline_text(office)
    hour = next(t for t in flagged[LATE_HOUR - 1].top_features if t.feature == "submitted_hour")
    assert hour.direction == "higher" and hour.value == 23


def test_the_demo_explanations_build_and_read(demo_scan):
    path, result = demo_scan
    frame = result.table.frame
    flagged = result.explainer.flagged()
    assert check_directions(frame, result, flagged.values()) > len(flagged)
    for e in flagged.values():
        text = explanation_text(e)
        assert text.startswith(f"Record {e.key}") and not re.search(r"-\d+%", text)
        for t in e.top_features:
            if isinstance(t.typical, TypicalLevel):
                continue
            assert t.typical.group is None or t.typical.records >= MIN_GROUP
        e.to_dict()
    # The one-line view agrees with the full explanations.
    positions = list(flagged)
    assert result.explainer.top_features_texts(positions, limit=5) == [
        "; ".join(text for text in [_one(t) for t in flagged[i].top_features]) for i in positions]


def _one(t) -> str:
    from investigator.explain.view import sign_text

    return f"{t.feature} ({sign_text(t.direction, t.with_feature)}, {t.share:.0%})"
