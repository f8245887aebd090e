"""The built-in demo: its planted cases come out on top, and `investigator demo` runs."""

import numpy as np
import pytest

import investigator
from investigator.cli.main import main
from investigator.io.demo import DEMO_ID, make_demo, write_demo


@pytest.mark.slow
def test_planted_cases_are_flagged_and_ranked_high(tmp_path):
    frame, planted = make_demo()
    result = investigator.scan(write_demo(tmp_path), id=DEMO_ID)
    keys = [str(k) for k in result.keys]
    rank = {int(i): r for r, i in enumerate(result.ranking())}
    for kind, ids in planted.items():
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
