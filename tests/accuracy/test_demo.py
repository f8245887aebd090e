"""The built-in demo: its planted cases come out on top, and `investigator demo` runs."""

import numpy as np
import pytest

import investigator
from investigator.cli.main import main
from investigator.io.demo import DEMO_ID, DEMO_OPTIONS, HOLIDAYS_2025, make_demo, write_demo


@pytest.mark.slow
def test_planted_cases_are_flagged_and_ranked_high(tmp_path):
    frame, planted = make_demo()
    result = investigator.scan(write_demo(tmp_path), **DEMO_OPTIONS)
    keys = [str(k) for k in result.keys]
    rank = {int(i): r for r, i in enumerate(result.ranking())}
    for kind, ids in planted.items():
        if kind == "peer":  # ordinary for the company: found within its department (below)
            continue
        for claim in ids:
            i = keys.index(claim)
            assert result.flagged[i], (kind, claim)
            assert rank[i] < 100, (kind, claim, rank[i])
    # The split purchase and the keying errors are the most unusual claims of the year.
    top = {keys[i] for i in result.ranking()[:15]}
    assert set(planted["pattern"]) <= top and set(planted["keying error"]) <= top


@pytest.mark.slow
def test_combination_cases_are_unusual_only_together(tmp_path):
    frame, planted = make_demo()
    result = investigator.scan(write_demo(tmp_path), id=DEMO_ID)
    keys = [str(k) for k in result.keys]
    quiet = [c for c in planted["combination"] if not result.column_hits[keys.index(c)]]
    assert len(quiet) >= 2  # at least two hit no per-column rule at all, yet are flagged
    assert all(result.flagged[keys.index(c)] for c in quiet)


def test_demo_is_reproducible():
    a, _ = make_demo()
    b, _ = make_demo()
    assert a.equals(b)
    assert np.isfinite(a["amount"]).all()


@pytest.mark.slow
def test_demo_command(tmp_path, capsys):
    assert main(["demo", "--keep", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert "Flagged:" in out and "CLM-" in out
    assert (tmp_path / "brindlemoor_expense_claims.csv").exists()


def test_the_demo_holidays_are_the_packages():
    # The `holidays` package's public holidays of England (GB-ENG) in 2025, the demo's calendar.
    import holidays

    assert sorted(str(d) for d in holidays.country_holidays("GB", subdiv="ENG", years=2025)) == list(HOLIDAYS_2025)


@pytest.fixture(scope="module")
def demo_within(tmp_path_factory):
    frame, planted = make_demo()
    result = investigator.scan(write_demo(tmp_path_factory.mktemp("demo")), **DEMO_OPTIONS, within="department")
    return frame, planted, result


@pytest.mark.slow
def test_weekend_and_holiday_claims_are_column_hits(demo_within):
    frame, planted, result = demo_within
    keys = [str(k) for k in result.keys]
    kinds = []
    for claim in planted["timing"]:
        i = keys.index(claim)
        kinds += [h["rule"] for h in result.column_hits[i] if h["column"] == "claim_date"]
        assert result.flagged[i], claim
    assert kinds == ["weekend", "weekend", "weekend", "holiday"]
    # No other claim is dated on a weekend or holiday (claims are dated on working days).
    timed = {keys[i] for i, hits in enumerate(result.column_hits) if any(h["column"] == "claim_date" for h in hits)}
    assert timed == set(planted["timing"])


@pytest.mark.slow
def test_claims_just_below_the_approval_limit_are_listed(demo_within):
    frame, planted, result = demo_within
    screen = result.run.screens["thresholds"][0]
    listed = {r["key"] for r in screen["records"]}
    assert set(planted["pattern"]) <= listed  # the split purchase, 486 to 499.50 each


@pytest.mark.slow
def test_the_peer_case_is_unusual_for_its_department_only(demo_within):
    frame, planted, result = demo_within
    keys = [str(k) for k in result.keys]
    i = keys.index(planted["peer"][0])
    assert not result.flagged[i] and result.within.flagged[i]
    only = np.flatnonzero(result.within.within_only)
    assert int(only[np.argmax(result.within.consensus_z[only])]) == i  # the most unusual within its segment only
