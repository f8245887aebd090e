"""Calendar parts of date columns (investigator/prepare/calendar.py): planted weekend, holiday, month-end and
after-hours records in an invented ledger found as column hits and said in words; durations against Python's
own datetime arithmetic; holidays against the `holidays` package; bad dates and options."""

from __future__ import annotations

import datetime as dt

import holidays
import numpy as np
import pandas as pd
import pytest

import investigator
from investigator.cli.main import main
from investigator.errors import InputError
from investigator.io.tables import load_table
from investigator.output.explanation import explanation_text
from investigator.prepare.calendar import Calendar, parse_dates, working_days_to_ends

pytestmark = pytest.mark.slow  # most tests scan a 3,000-record ledger (1 to 3 s)

US_2025 = ["2025-01-01", "2025-01-20", "2025-02-17", "2025-05-26", "2025-06-19", "2025-07-04", "2025-09-01",
           "2025-10-13", "2025-11-11", "2025-11-27", "2025-12-25"]  # the package's US holidays of 2025


def ledger(n: int = 3000, seed: int = 0, month_days: int | None = None, weekends: bool = False) -> pd.DataFrame:
    """Invented journal entries of 2025, posted 8:00-18:00 on working days (no US public holiday; with
    ``month_days``, only on the first that many days of a month; with ``weekends``, on every day)."""
    rng = np.random.default_rng(seed)
    days = pd.date_range("2025-01-02", "2025-12-30", freq="D" if weekends else "B")
    days = days[~days.isin(pd.to_datetime(US_2025))]
    if month_days:
        days = days[days.day <= month_days]
    when = pd.to_datetime(rng.choice(days, n)) + pd.to_timedelta(rng.integers(8 * 60, 18 * 60, n), unit="m")
    return pd.DataFrame({"entry": [f"JE-{i:05d}" for i in range(n)], "posted_at": when.strftime("%Y-%m-%d %H:%M"),
                         "amount": np.round(np.exp(rng.normal(6, 1, n)), 2),
                         "account": rng.choice(["4000", "5100", "6200", "7300"], n)})


PLANTED = {10: ("2025-03-09 11:00", "weekend"), 11: ("2025-06-14 10:30", "weekend"),
           20: ("2025-12-25 10:00", "holiday"), 21: ("2025-12-25 11:30", "holiday"),
           30: ("2025-04-15 23:40", "outside hours"), 31: ("2025-05-20 02:10", "outside hours")}


@pytest.fixture(scope="module")
def planted_ledger():
    frame = ledger()
    for i, (when, _) in PLANTED.items():
        frame.loc[i, "posted_at"] = when
    result = investigator.scan(frame, options=investigator.ScanOptions(id="entry", holidays="US"))
    return frame, result


def calendar_hits(result, i) -> list[dict]:
    return [h for h in result.column_hits[i] if "text" in h]


def test_the_holiday_table_is_the_packages():
    # The `holidays` package (offline tables) is the source; Independence Day on 4 July and Christmas Day on
    # 25 December are fixed by US federal law (5 U.S.C. 6103, from memory).
    us = holidays.country_holidays("US", years=2025)
    assert sorted(str(d) for d in us) == US_2025
    assert us[dt.date(2025, 7, 4)] == "Independence Day" and us[dt.date(2025, 12, 25)] == "Christmas Day"
    table = load_table(pd.DataFrame({"d": ["2025-07-04", "2025-07-07", "2025-12-25"]}), min_rows=1)
    cal = Calendar(dates=("d",), holidays="US").fit(table, [])
    assert list(cal.values(table, "d: holiday")) == ["Independence Day", "no", "Christmas Day"]
    assert list(cal.values(table, "d: weekday")) == ["Friday", "Monday", "Thursday"]  # Python's date.weekday


def test_planted_timing_is_a_column_hit_of_its_own_kind(planted_ledger):
    frame, result = planted_ledger
    for i, (when, kind) in PLANTED.items():
        hits = calendar_hits(result, i)
        assert [h["rule"] for h in hits] == [kind], (i, hits)
        assert hits[0]["column"] == "posted_at" and hits[0]["value"] == when[:10]
    others = [i for i in range(len(frame)) if i not in PLANTED and calendar_hits(result, i)]
    assert others == []  # ordinary postings have no calendar hit


def test_the_explanation_says_the_day_in_words(planted_ledger):
    frame, result = planted_ledger
    text = explanation_text(result.explain("JE-00010"))
    assert "posted_at: weekend (on Sunday 2025-03-09: 2 records on the 104 weekend days" in text
    text = explanation_text(result.explain("JE-00020"))
    assert "on a public holiday, Christmas Day (Thursday 2025-12-25): 2 records on it" in text
    text = explanation_text(result.explain("JE-00030"))
    assert "at 23:40 on Tuesday 2025-04-15, outside the working hours 8-18: 2 of 3,000 records" in text
    assert "posted_at: hour: three_sigma" not in text  # the hour is left to its own rule


def test_weekend_and_after_hours_postings_are_flagged(planted_ledger):
    # Measured: the four weekend and after-hours postings rank 1 to 4 (weekday and hour are features).
    frame, result = planted_ledger
    assert all(result.flagged[i] for i in (10, 11, 30, 31))


def test_a_business_that_works_weekends_has_no_weekend_hits():
    frame = ledger(weekends=True)
    result = investigator.scan(frame, options=investigator.ScanOptions(id="entry"))
    assert not [h for hits in result.column_hits for h in hits if h["rule"] == "weekend"]


def test_month_end_is_a_hit_where_postings_come_early_in_the_month():
    # Entries posted on the first 20 days of each month only; three planted on a month's last working day.
    frame = ledger(month_days=20)
    planted = {5: "2025-01-31 10:00", 6: "2025-04-30 09:00", 7: "2025-10-31 16:00"}
    for i, when in planted.items():
        frame.loc[i, "posted_at"] = when
    result = investigator.scan(frame, options=investigator.ScanOptions(id="entry"))
    hit = {i for i in range(len(frame)) if any(h["rule"] == "month end" for h in result.column_hits[i])}
    assert hit == set(planted)
    text = explanation_text(result.explain(row=6))
    assert "posted_at: month end (on Friday 2025-01-31, the last working day of the month: 3 records on" in text
    # A ledger posted on every working day has no month-end hits.
    plain = investigator.scan(ledger(), options=investigator.ScanOptions(id="entry"))
    assert not [h for hits in plain.column_hits for h in hits if h["rule"] == "month end"]


def test_working_days_to_the_period_ends():
    # Counted by hand on the 2025 calendar: 2025-03-28 is a Friday, the last working day of March and of Q1
    # is Monday 2025-03-31; 2025-12-24 leaves 12-26, 12-29, 12-30, 12-31 when 12-25 is a holiday.
    days = np.array(["2025-03-28", "2025-03-31", "2025-03-29", "2025-12-24", "2024-02-28"], dtype="datetime64[D]")
    ends = working_days_to_ends(days, np.array(["2025-12-25"], dtype="datetime64[D]"))
    assert ends["month"].tolist() == [1, 0, 1, 4, 1]  # 2024 is a leap year: 2024-02-29 is a Thursday
    assert ends["quarter"].tolist()[:3] == [1, 0, 1]
    assert ends["year"].tolist()[3] == 4


def test_durations_across_month_year_and_time_zones():
    # Against Python's own datetime arithmetic (the standard library): across a year end, a leap day, one
    # instant written with two UTC offsets (either side of Central Europe's change to summer time) and an hour
    # across that change.
    start = ["2024-12-31 23:00", "2024-02-28", "2025-03-30T01:30+01:00", "2025-03-30T01:30+01:00", "2025-01-31"]
    end = ["2025-01-01 01:00", "2024-03-01", "2025-03-30T02:30+02:00", "2025-03-30T03:30+02:00", "2025-03-01"]
    table = load_table(pd.DataFrame({"a": start, "b": end}), min_rows=1)  # mixed: some with an offset
    cal = Calendar(dates="none", durations="a:b").fit(table, [])
    got = cal.values(table, "b - a: days").tolist()
    want = [(dt.datetime.fromisoformat(e) - dt.datetime.fromisoformat(s)).total_seconds() / 86400
            for s, e in zip(start, end, strict=True)]
    assert got == pytest.approx(want, abs=1e-9)
    assert got[2] == 0.0 and got[3] == pytest.approx(1 / 24)  # 02:30 at +02:00 is 01:30 at +01:00
    assert got[0] == pytest.approx(2 / 24) and got[1] == 2.0 and got[4] == 29.0


def test_wall_clock_time_is_used_for_the_parts_of_times_with_an_offset():
    parsed = parse_dates(pd.Series(["2025-03-09T23:30-05:00", "2025-03-10T09:00+09:00"]), "d", "t.csv")
    assert parsed.wall.dt.hour.tolist() == [23, 9]  # as posted, not converted to UTC
    assert parsed.wall.dt.day_of_week.tolist() == [6, 0]


def test_durations_are_features_and_scored():
    rng = np.random.default_rng(1)
    n = 600
    invoiced = pd.Timestamp("2025-01-01") + pd.to_timedelta(rng.integers(0, 300, n), unit="D")
    paid = invoiced + pd.to_timedelta(rng.integers(20, 40, n), unit="D")
    frame = pd.DataFrame({"invoice": [f"I{i}" for i in range(n)], "invoice_date": invoiced.strftime("%Y-%m-%d"),
                          "paid_date": paid.strftime("%Y-%m-%d"), "amount": rng.normal(500, 50, n).round(2)})
    frame.loc[3, "paid_date"] = (invoiced[3] + pd.Timedelta(days=240)).strftime("%Y-%m-%d")
    result = investigator.scan(frame, options=investigator.ScanOptions(id="invoice", durations="invoice_date:paid_date",
                                                                       dates="none"))
    assert "paid_date - invoice_date: days" in result.features.names
    assert result.consensus.argmax() == 3
    assert any(h["column"] == "paid_date - invoice_date: days" for h in result.column_hits[3])


def test_unparseable_dates_are_missing_with_a_notice():
    frame = ledger(n=400)
    frame.loc[[3, 9], "posted_at"] = ["soon", "31/31/2025"]
    result = investigator.scan(frame, options=investigator.ScanOptions(id="entry", dates="posted_at"))
    notice = [n for n in result.run.notices if "not dates" in n]
    assert notice == ["column 'posted_at': 2 cells that are not dates (first in row 4: 'soon') treated as missing"]
    weekday = result.features.names.index("posted_at: weekday")
    assert result.features.levels[weekday][3] == "(missing)"


def test_day_first_dates_are_told_from_the_values():
    frame = pd.DataFrame({"d": ["13/02/2025", "03/04/2025", "25/12/2025"]})
    parsed = parse_dates(frame["d"], "d", "t.csv")
    assert [str(x.date()) for x in parsed.wall] == ["2025-02-13", "2025-04-03", "2025-12-25"]


def test_dates_in_both_orders_are_refused_in_one_line():
    with pytest.raises(InputError) as err:
        parse_dates(pd.Series(["13/02/2025", "02/13/2025", "01/01/2025"]), "d", "t.csv")
    assert str(err.value) == ("t.csv: column 'd' has dates in day/month order (row 1: '13/02/2025') and in month/day "
                              "order (row 2: '02/13/2025'); write them in one order (ISO 2025-03-09 is safest)")


def test_ambiguous_order_gets_a_notice():
    parsed = parse_dates(pd.Series(["03/04/2025", "05/06/2025"]), "d", "t.csv")
    assert [str(x.date()) for x in parsed.wall] == ["2025-03-04", "2025-05-06"]
    assert "read as month/day" in parsed.notices[0]
    first = parse_dates(pd.Series(["03/04/2025"]), "d", "t.csv", dayfirst=True)
    assert str(first.wall[0].date()) == "2025-04-03"


@pytest.mark.parametrize("args, message", [
    (["--dates", "nowhere"], "--dates names column 'nowhere', which is not in the file"),
    (["--dates", "amount"], "column 'amount' named in --dates is mostly not dates"),
    (["--holidays", "XX"], "--holidays: Country XX not available"),
    (["--holidays", "12345"], "--holidays must be a country code such as US"),
    (["--hours", "18-8"], "--hours must run from an hour 0-23 to a later one"),
    (["--hours", "nine"], "--hours must be two whole hours such as 8-18"),
    (["--durations", "posted_at"], "--durations: 'posted_at' is not START:END"),
    (["--durations", "posted_at:nowhere"], "--durations names column 'nowhere'"),
])
def test_bad_calendar_options_exit_2_in_one_line(tmp_path, capsys, args, message):
    path = tmp_path / "ledger.csv"
    ledger(n=200).to_csv(path, index=False)
    assert main(["scan", str(path), "--id", "entry", "--quiet", *args]) == 2
    err = capsys.readouterr().err.strip()
    assert message in err and "\n" not in err and "Traceback" not in err


def test_dates_none_leaves_them_out(tmp_path):
    path = tmp_path / "ledger.csv"
    ledger(n=300).to_csv(path, index=False)
    result = investigator.scan(str(path), options=investigator.ScanOptions(id="entry", dates="none"))
    assert not [n for n in result.features.names if n.startswith("posted_at")]
    info = next(c for c in result.columns if c.name == "posted_at")
    assert info.role == "date" and not info.is_feature


def test_calendar_parts_reach_the_run_record_and_the_json(tmp_path, planted_ledger):
    frame, result = planted_ledger
    doc = result.run.to_dict()
    assert doc["calendar"]["columns"]["posted_at"] == {"parts": ["weekday", "period end", "hour", "holiday"],
                                                       "times": True}
    assert doc["calendar"]["rarely_worked"]["posted_at"] == ["holiday", "outside hours", "weekend", "year end"]
    parts = [c for c in doc["columns"] if c.get("source") == "posted_at"]
    assert [c["name"] for c in parts] == ["posted_at: weekday", "posted_at: period end", "posted_at: hour",
                                          "posted_at: holiday"]
    out = result.write(tmp_path / "out.csv")
    csv = pd.read_csv(out)
    assert csv.loc[10, "column_hits"].startswith("posted_at: weekend")


def test_check_against_a_reference_ledger(tmp_path):
    reference, new = ledger(seed=2), ledger(n=200, seed=3)
    new.loc[4, "posted_at"] = "2025-08-17 09:15"  # a Sunday
    ref_path, new_path = tmp_path / "ref.csv", tmp_path / "new.csv"
    reference.to_csv(ref_path, index=False)
    new.to_csv(new_path, index=False)
    result = investigator.check(str(new_path), reference=str(ref_path), id="entry")
    assert [h["rule"] for h in calendar_hits(result, 4)] == ["weekend"]
    assert load_table(str(new_path)).n_rows == 200


def test_the_summary_names_the_timing(planted_ledger):
    _, result = planted_ledger
    lines = [line for line in result.summary().splitlines() if "JE-00010" in line]
    assert lines and lines[0].endswith("| posted_at weekend")


def test_mixed_date_formats_in_one_column_are_read():
    # ISO dates beside day/month dates with a day above 12 (so their order is known) and dotted ones.
    parsed = parse_dates(pd.Series(["2025-03-09", "13/03/2025", "14.03.2025", "2025-03-15 08:30"]), "d", "t.csv")
    assert [str(x) for x in parsed.wall] == ["2025-03-09 00:00:00", "2025-03-13 00:00:00", "2025-03-14 00:00:00",
                                             "2025-03-15 08:30:00"]
    assert parsed.notices == [] and parsed.has_time
