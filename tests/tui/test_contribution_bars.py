"""The Record screen's bars: a feature name is shown whole when it fits, else ends with an ellipsis (issue 16: nothing
is cut silently), and the bars' lengths follow the shares."""

from __future__ import annotations

from investigator.explain.explanation import Contribution
from investigator.tui.widgets.contribution_bars import bars_text


def lines(contributions, width):
    return bars_text({"local_density": tuple(contributions)}, {"local_density": True}, width=width).plain.splitlines()


def test_a_calendar_part_is_named_whole_at_80_columns():
    text = lines([Contribution("claim_date: weekday", 3.0, 0.75), Contribution("amount", 1.0, 0.25)], 80)
    assert text[0] == "local_density (flags it)"
    assert text[1].startswith("  claim_date: weekday █") and text[1].endswith("75%")
    assert text[2].startswith("  amount              █") and text[2].endswith("25%")


def test_a_name_longer_than_a_quarter_of_the_width_ends_with_an_ellipsis():
    long = "shipping_address: distance to the nearest depot in kilometres"
    text = lines([Contribution(long, 1.0, 1.0)], 80)
    name = text[1][2:22]  # a quarter of 80 columns
    assert name == long[:19] + "…"
    assert all(len(line) <= 80 for line in text)


def test_bar_lengths_follow_the_shares():
    # The bar is the share of the bar's width (80 - the one-letter names' column - 12 for margins and the
    # percentage), rounded to a whole cell.
    text = lines([Contribution("a", 3.0, 0.75), Contribution("b", 1.0, 0.25)], 80)
    bar_w = 80 - 1 - 12
    assert text[1].count("█") == round(0.75 * bar_w) and text[2].count("█") == round(0.25 * bar_w)
