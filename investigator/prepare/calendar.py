"""Calendar parts of date columns: the features and column rules that unusual timing needs.

A date or date-time column (detected, or named with ``dates``) is not used as a day count: a weekend
posting is not far from its neighbours in days. Instead it yields *parts*, each a feature reported under
its source column ("posting_date: weekday"):

* ``weekday``: Monday .. Sunday, a category (rarity-coded like every category, so a Sunday among weekday
  records stands out to every method);
* ``period end``: the last working day of the year, of a quarter or of a month, or none: a category, from
  the working days left to each period end (0 on the last working day and the days after it);
* ``hour``: the time of day in hours (14.5 = 14:30), where the column holds times;
* ``holiday``: the public holiday's name or "no", with ``holidays`` (a country code such as ``US`` or
  ``DE-BY``; the offline tables of the `holidays` package);
* durations between two date columns (``durations a:b``): b - a in days, a number.

Day of month and the working days to the month, quarter and year end are computed for every record
(explanations, the run record) but are not features of their own: spread evenly over the month they add a
dimension of noise to every distance and carry nothing a period-end level does not.

Working days are Monday to Friday, less the public holidays when ``holidays`` is given (numpy's business-day
calendar). Times: a value with a UTC offset is read at its own wall-clock time for the parts (a posting at
22:00 local time is late wherever the server was), and converted to UTC for durations; values without an
offset are taken as wall-clock times of one unstated zone, and, beside ones that have an offset, as UTC.

Column rules, beside the per-column rules of numbers (which leave the hour to them): a record on a weekend,
on a public holiday or outside working hours (``hours``, default 8-18: from 8:00 up to 18:00) is a hit when
the fitted records rarely show that timing: records per weekend day (per day of that holiday, per hour
outside working hours) at most a quarter of those per working day (hour), and fewer than a working day's
rate would give by chance (a Poisson test at 1%). So a business that works weekends gets no weekend hits,
and two postings on Christmas Day against 12 on a working day are both hits. The last working days of the
months are judged the same way (a business that posts in the first weeks of a month only). A record on the
last working day of the year or after it is a hit when at most 2% of the records fall there (entries at the end of a
period are among those the auditing standards on fraud ask to test, from memory of ISA 240). The quarter
and the factor of 2% are our choices, not a published rule.
"""

from __future__ import annotations

import re
from collections import Counter
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from investigator.errors import InputError
from investigator.io.tables import Table, name_list
from investigator.prepare.roles import CATEGORICAL, DATE, NUMERIC, ColumnInfo

WEEKDAYS = ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday")
PARTS = ("weekday", "period end", "hour", "holiday")
PERIOD_LEVELS = ("year end", "quarter end", "month end", "none")
# A weekend, a holiday or the hours outside working hours are rarely worked when records per such day (hour)
# are at most a quarter of those per working day (hour), and fewer than a working day's rate would give by
# chance: a Poisson test at 1% (SciPy), so that two records on one holiday against 12 a day count.
RARE_RATE = 0.25
RARE_P = 0.01
RARE_SHARE = 0.02  # the year end is a column hit when at most this share of the records falls there
DEFAULT_HOURS = (8, 18)
# Share of a column's non-missing cells that must parse for a column named in ``dates`` to be used.
NAMED_PARSE_SHARE = 0.5
_SLASHED = re.compile(r"^\s*(\d{1,2})[-/.](\d{1,2})[-/.](\d{2,4})\b")
_OFFSET = re.compile(r"(?:Z|[+-]\d{2}:?\d{2})\s*$")


def part_name(column: str, part: str) -> str:
    return f"{column}: {part}"


def duration_name(start: str, end: str) -> str:
    return f"{end} - {start}: days"


def parse_hours(text: str | tuple[int, int] | None) -> tuple[int, int]:
    """'8-18' -> (8, 18): working hours from 8:00 up to 18:00."""
    if text is None:
        return DEFAULT_HOURS
    if isinstance(text, tuple):
        start, end = text
    else:
        m = re.fullmatch(r"\s*(\d{1,2})\s*-\s*(\d{1,2})\s*", str(text))
        if not m:
            raise InputError(f"`hours` must be two whole hours such as 8-18, not '{text}'", parameters=("hours",))
        start, end = int(m.group(1)), int(m.group(2))
    if not 0 <= start < end <= 24:
        raise InputError(f"`hours` must run from an hour 0-23 to a later one up to 24 (such as 8-18), not "
                         f"'{start}-{end}'", parameters=("hours",))
    return int(start), int(end)


def parse_durations(value) -> tuple[tuple[str, str], ...]:
    """'invoice_date:paid_date,ordered:shipped' -> (('invoice_date', 'paid_date'), ...)."""
    if value is None:
        return ()
    items = value.split(",") if isinstance(value, str) else list(value)
    out = []
    for item in items:
        if isinstance(item, tuple | list) and len(item) == 2:
            out.append((str(item[0]).strip(), str(item[1]).strip()))
            continue
        parts = str(item).split(":")
        if len(parts) != 2 or not all(p.strip() for p in parts):
            raise InputError(f"`durations`: '{item}' is not START:END (two date columns, such as "
                             "invoice_date:paid_date)", parameters=("durations",))
        out.append((parts[0].strip(), parts[1].strip()))
    return tuple(out)


def holiday_calendar(code: str | None, years: list[int]):
    """The `holidays` package's public holidays of ``code`` (``CC`` or ``CC-SUBDIV``) for ``years``."""
    if not code:
        return None
    import holidays  # deferred: only scans that ask for holidays pay for its import

    country, _, subdiv = str(code).strip().partition("-")
    try:
        return holidays.country_holidays(country.upper(), subdiv=subdiv.upper() or None, years=years)
    except NotImplementedError as exc:
        raise InputError(f"`holidays`: {exc}; give a country code such as US or DE, or a country and "
                         "subdivision such as DE-BY", parameters=("holidays",)) from None


@dataclass
class ParsedDates:
    """One date column as read: ``wall`` the wall-clock times (naive; for the parts), ``instant`` the times
    for durations (UTC where offsets were given), ``has_time`` whether any value has a time of day."""

    wall: pd.Series
    instant: pd.Series
    has_time: bool
    notices: list[str] = field(default_factory=list)


def parse_dates(values: pd.Series, column: str, table_name: str, dayfirst: bool | None = None) -> ParsedDates:
    """A column of dates (datetime values, or text in ISO 8601, day/month/year or month/day/year order) as
    date-times. Text that is not a date becomes missing, with a notice. Day and month order is told from the
    values (a first field above 12 is a day); a column that has both orders is refused, one whose order
    cannot be told is read month first unless ``dayfirst``, with a notice."""
    notices: list[str] = []
    if pd.api.types.is_datetime64_any_dtype(values):
        if getattr(values.dt, "tz", None) is not None:
            return ParsedDates(values.dt.tz_localize(None), values.dt.tz_convert("UTC").dt.tz_localize(None),
                               _has_time(values.dt.tz_localize(None)))
        return ParsedDates(values, values, _has_time(values))
    text = values.astype("string").str.strip()
    text = text.where(text != "", pd.NA)
    present = text.notna()
    try:  # the common case first, ISO 8601 without offsets, at the parser's full speed
        iso = pd.to_datetime(text, format="ISO8601")
    except (ValueError, TypeError):
        iso = None
    if iso is not None and getattr(iso.dt, "tz", None) is None:
        return ParsedDates(iso, iso, _has_time(iso))
    slashed = text.str.extract(_SLASHED)
    first = pd.to_numeric(slashed[0], errors="coerce")
    second = pd.to_numeric(slashed[1], errors="coerce")
    # A value with both fields above 12 (31/31/2025) is no date in either order: it tells nothing.
    day_first_rows = np.flatnonzero(((first > 12) & (second <= 12)).to_numpy(dtype=bool, na_value=False))
    month_first_rows = np.flatnonzero(((second > 12) & (first <= 12)).to_numpy(dtype=bool, na_value=False))
    if len(day_first_rows) and len(month_first_rows):
        a, b = day_first_rows[0], month_first_rows[0]
        raise InputError(
            f"{table_name}: column '{column}' has dates in day/month order (row {a + 1}: '{text.iloc[a]}') and in "
            f"month/day order (row {b + 1}: '{text.iloc[b]}'); write them in one order (ISO 2025-03-09 is "
            "safest)", parameters=("dates",))
    if dayfirst is None:
        if len(day_first_rows):
            dayfirst = True
        else:
            dayfirst = False
            if not len(month_first_rows) and slashed[0].notna().any():
                notices.append(f"column '{column}': dates such as '{text[slashed[0].notna()].iloc[0]}' could be "
                               "day/month or month/day; read as month/day (give `dayfirst` if they are day/month)")
    offsets = text.str.contains(_OFFSET, na=False)
    wall_text = text.str.replace(_OFFSET, "", regex=True)
    wall = _mixed(wall_text, dayfirst)
    instant = wall
    if offsets.any():
        aware = _mixed(text.where(offsets), dayfirst, utc=True)
        instant = aware.dt.tz_localize(None).where(offsets, wall)
        if not offsets[present].all():
            notices.append(f"column '{column}': {int(offsets.sum()):,} date-times carry a UTC offset and "
                           f"{int((present & ~offsets).sum()):,} do not; those without are taken as UTC for "
                           "durations")
    bad = np.flatnonzero((present & wall.isna()).to_numpy(dtype=bool))
    if len(bad):
        notices.append(f"column '{column}': {len(bad):,} cell{'s' if len(bad) > 1 else ''} that are not dates "
                       f"(first in row {bad[0] + 1}: '{text.iloc[bad[0]]}') treated as missing")
    return ParsedDates(wall, instant, _has_time(wall), notices)


def _mixed(text: pd.Series, dayfirst: bool, utc: bool = False) -> pd.Series:
    """Each value parsed by its own format; the day-first order applies to day/month dates only (the parser
    would read an ISO 2025-03-09 as 3 September with it)."""
    iso = text.str.match(r"^\s*\d{4}-", na=False)
    out = pd.to_datetime(text.where(iso), errors="coerce", format="mixed", utc=utc)
    if dayfirst and (~iso & text.notna()).any():
        out = out.where(iso, pd.to_datetime(text.where(~iso), errors="coerce", format="mixed", dayfirst=True, utc=utc))
    elif (~iso & text.notna()).any():
        out = pd.to_datetime(text, errors="coerce", format="mixed", utc=utc)
    return out


def _has_time(wall: pd.Series) -> bool:
    ok = wall.dropna()
    return bool(len(ok)) and bool((ok != ok.dt.normalize()).any())


@dataclass
class DateParts:
    """The parts of one date column for every record of one table (NaN / None where the date is missing)."""

    weekday: np.ndarray  # 0 = Monday .. 6 = Sunday, -1 where missing
    day: np.ndarray  # day of month, NaN where missing
    to_month_end: np.ndarray  # working days after this day up to the period's end (0 on the last one)
    to_quarter_end: np.ndarray
    to_year_end: np.ndarray
    hour: np.ndarray  # hours (14.5 = 14:30), NaN where missing
    holiday: np.ndarray  # the holiday's name, "" where none, None where missing
    dates: np.ndarray  # datetime64[D]; NaT where missing

    def period_level(self) -> np.ndarray:
        level = np.full(len(self.day), "none", dtype=object)
        level[self.to_month_end == 0] = "month end"
        level[self.to_quarter_end == 0] = "quarter end"
        level[self.to_year_end == 0] = "year end"
        level[np.isnan(self.day)] = None
        return level


class Calendar:
    """Which date columns yield which parts, fitted on the (reference) records; computes the parts of any
    table with the same columns, and the calendar column hits.

    Parameters: ``dates`` the columns to read as dates (None: the detected date columns; "none": no
    calendar parts), ``hours`` the working hours, ``holidays`` a country code, ``durations`` pairs of date
    columns, ``dayfirst`` the order of day/month dates where it cannot be told.
    """

    def __init__(self, dates=None, hours=None, holidays: str | None = None, durations=(),
                 dayfirst: bool | None = None) -> None:
        self.dates = dates
        self.hours = parse_hours(hours)
        self.holidays = holidays
        self.durations = parse_durations(durations)
        self.dayfirst = dayfirst

    # -- fitting ------------------------------------------------------------------------------------------------

    def fit(self, table: Table, detected: list[str], view: CalendarView | None = None) -> Calendar:
        """Decide the date columns (``detected``: the columns the roles found to hold dates) and their parts;
        ``view``, a reading of ``table`` by this calendar to parse into (for the caller to reuse)."""
        view = view if view is not None else CalendarView(self, table)
        self.notices_: list[str] = []
        columns = list(table.frame.columns)
        if self.dates == "none":
            chosen: list[str] = []
        elif self.dates is None:
            chosen = list(detected)
        else:
            chosen = list(self.dates)
        for name in [*chosen, *(c for pair in self.durations for c in pair)]:
            if name not in columns:
                parameter = "dates" if name in chosen else "durations"
                raise InputError(f"{table.name}: `{parameter}` names column '{name}', which is not in the file; "
                                 f"columns are: {name_list(columns)}", parameters=(parameter,))
        self.columns_ = chosen
        self.duration_pairs_ = list(self.durations)
        parsed = {c: view.parsed(c) for c in dict.fromkeys([*chosen, *(c for p in self.durations for c in p)])}
        for c, p in parsed.items():
            self.notices_ += p.notices
            present = table.frame[c].notna().sum()
            if present and p.wall.notna().sum() < NAMED_PARSE_SHARE * present:
                first = table.frame[c].dropna().iloc[0]
                parameter = "dates" if c in chosen else "durations"
                raise InputError(f"{table.name}: column '{c}' named in `{parameter}` is mostly not dates (first "
                                 f"value '{first}'); name a column of dates such as 2025-03-09",
                                 parameters=(parameter,))
        years = sorted({int(y) for c in chosen for y in parsed[c].wall.dt.year.dropna().unique()})
        if self.holidays and chosen:
            span = list(range(years[0] - 1, years[-1] + 2)) if years else []
            self.holiday_dates_ = holiday_calendar(self.holidays, span)
        else:
            if self.holidays:
                holiday_calendar(self.holidays, [])  # an unknown code is an error even without dates
            self.holiday_dates_ = None
        self.with_time_ = {c: parsed[c].has_time for c in chosen}
        self.parts_ = {c: [p for p in PARTS if (p != "hour" or self.with_time_[c])
                           and (p != "holiday" or self.holiday_dates_ is not None)] for c in chosen}
        self.rules_ = {c: self._fit_rules(c, view.parts(c)) for c in chosen}
        self.derived_names_ = frozenset(name for name, _, _ in self.derived())
        for c in chosen:
            used = ", ".join(self.parts_[c])
            self.notices_.append(f"column '{c}': dates; used through their calendar parts ({used}), not as a "
                                 "day count")
        return self

    def derived(self) -> list[tuple[str, str, str]]:
        """(feature name, source column, kind) of every part and duration: kind numeric or categorical."""
        out = []
        for c in self.columns_:
            for part in self.parts_[c]:
                out.append((part_name(c, part), c, "numeric" if part == "hour" else "categorical"))
        for a, b in self.duration_pairs_:
            out.append((duration_name(a, b), f"{a}, {b}", "numeric"))
        return out

    def judged_by_own_rule(self) -> frozenset[str]:
        """The parts the per-column rules of numbers leave to the calendar's own rules (the hour)."""
        return frozenset(part_name(c, "hour") for c in self.columns_ if "hour" in self.parts_[c])

    def derived_names(self) -> frozenset[str]:
        return self.derived_names_

    # -- values -------------------------------------------------------------------------------------------------

    def read(self, table: Table) -> CalendarView:
        """The parts of ``table``'s date columns, parsed once for every part and rule asked of the view (the
        fitted calendar itself is never changed by reading: threads may score tables with it at once)."""
        return CalendarView(self, table)

    def _holiday_days(self) -> np.ndarray:
        hol = self.holiday_dates_
        return (np.array(sorted(hol.keys()), dtype="datetime64[D]") if hol is not None
                else np.array([], dtype="datetime64[D]"))

    def _holiday_names(self, days: np.ndarray) -> np.ndarray:
        """The holiday's name for each day ("" where none), by a sorted lookup (no Python loop per record)."""
        hol = self.holiday_dates_
        keys = self._holiday_days()
        if hol is None or not len(keys):
            return np.full(len(days), "", dtype=object)
        labels = np.array([hol.get(pd.Timestamp(d).date()) for d in keys], dtype=object)
        at = np.clip(np.searchsorted(keys, days), 0, len(keys) - 1)
        return np.where(keys[at] == days, labels[at], "").astype(object)

    def parts_of_dates(self, wall: pd.Series) -> DateParts:
        """The parts of one column's wall-clock date-times."""
        ok = wall.notna().to_numpy()
        days = wall.dt.floor("D").to_numpy(dtype="datetime64[D]")
        weekday = np.where(ok, wall.dt.day_of_week.to_numpy(dtype=float, na_value=-1), -1).astype(int)
        day = wall.dt.day.to_numpy(dtype=float, na_value=np.nan)
        hour = (wall.dt.hour + wall.dt.minute / 60 + wall.dt.second / 3600).to_numpy(dtype=float, na_value=np.nan)
        ends = working_days_to_ends(np.where(ok, days, np.datetime64("2000-01-01")), self._holiday_days())
        ends = {label: np.where(ok, left, np.nan) for label, left in ends.items()}
        names = np.full(len(wall), None, dtype=object)
        if self.holiday_dates_ is not None:
            names[ok] = self._holiday_names(days[ok])
        return DateParts(weekday, day, ends["month"], ends["quarter"], ends["year"], hour, names,
                         np.where(ok, days, np.datetime64("NaT")))

    def values(self, table: Table, name: str) -> pd.Series:
        """The values of the derived feature ``name`` for the records of ``table`` (one part: read them
        through :meth:`read` to compute several)."""
        return self.read(table).values(name)

    def hits(self, table: Table) -> list[list[dict]]:
        return self.read(table).hits()

    # -- column rules -------------------------------------------------------------------------------------------

    def _fit_rules(self, column: str, parts: DateParts) -> dict:
        """The timing kinds of one date column that the fitted records rarely show, with their counts: a
        weekend or a public holiday when records per such day are at most a tenth of records per working day,
        hours outside the working hours when records per such hour are at most a tenth of those per working
        hour, the year's last working day (or after it) when at most 2% of the records fall there."""
        ok = parts.weekday >= 0
        days = parts.dates[ok]
        rules: dict = {}
        if not len(days):
            return rules
        first, last = days.min(), days.max() + np.timedelta64(1, "D")
        span = np.arange(first, last, dtype="datetime64[D]")
        hol = self.holiday_dates_
        names = self._holiday_names(span) if hol is not None else np.full(len(span), "", dtype=object)
        weekend = ((span.astype("datetime64[D]").view("int64") - 4) % 7) >= 5  # 1970-01-05 was a Monday
        working = ~weekend & (names == "")
        on_working = ok & (parts.weekday < 5) & np.array([not h for h in parts.holiday]) if hol is not None \
            else ok & (parts.weekday < 5)
        per_working_day = on_working.sum() / max(1, working.sum())
        rules["per working day"] = float(per_working_day)
        count = int((parts.weekday >= 5).sum())
        if weekend.any() and _rarely(count, weekend.sum(), per_working_day):
            rules["weekend"] = (count, int(weekend.sum()))
        if hol is not None:
            rules["holiday"] = {}
            on_holiday = Counter(h for h in parts.holiday if h)
            for name in sorted(set(names[names != ""])):
                n_days = int((names == name).sum())
                on = on_holiday[name]
                if _rarely(on, n_days, per_working_day):
                    rules["holiday"][name] = (on, n_days)
        if self.with_time_[column]:
            start, end = self.hours
            timed = ok & ~np.isnan(parts.hour)
            with np.errstate(invalid="ignore"):
                outside = timed & ((parts.hour < start) | (parts.hour >= end))
            inside_rate = (timed.sum() - outside.sum()) / (end - start)
            if _rarely(int(outside.sum()), 24 - (end - start), inside_rate):
                rules["outside hours"] = (int(outside.sum()), int(timed.sum()))
        span_ends = working_days_to_ends(span, self._holiday_days())
        month_end_days = int((working & (span_ends["month"] == 0)).sum())
        on_month_end = int((on_working & (parts.to_month_end == 0)).sum())
        if month_end_days and _rarely(on_month_end, month_end_days, per_working_day):
            rules["month end"] = (on_month_end, month_end_days)
        year_end = int((parts.to_year_end == 0).sum())
        if year_end <= RARE_SHARE * int(ok.sum()):
            rules["year end"] = (year_end, int(ok.sum()))
        return rules

    def describe(self) -> dict:
        return {"columns": {c: {"parts": self.parts_[c], "times": self.with_time_[c]} for c in self.columns_},
                "durations": [list(p) for p in self.duration_pairs_], "hours": list(self.hours),
                "holidays": self.holidays, "rare_rate": RARE_RATE, "rare_p": RARE_P, "rare_share": RARE_SHARE,
                "rarely_worked": {c: sorted(k for k in self.rules_[c] if k != "per working day" and self.rules_[c][k])
                                  for c in self.columns_}}



class CalendarView:
    """One table read by a fitted :class:`Calendar`: each date column parsed once, its parts computed once,
    for every part and rule asked of it."""

    def __init__(self, calendar: Calendar, table: Table) -> None:
        self.calendar = calendar
        self.table = table
        self._parsed: dict[str, ParsedDates] = {}
        self._parts: dict[str, DateParts] = {}

    def parsed(self, column: str) -> ParsedDates:
        if column not in self._parsed:
            self._parsed[column] = parse_dates(self.table.frame[column], column, self.table.name,
                                               self.calendar.dayfirst)
        return self._parsed[column]

    def parts(self, column: str) -> DateParts:
        if column not in self._parts:
            self._parts[column] = self.calendar.parts_of_dates(self.parsed(column).wall)
        return self._parts[column]

    def values(self, name: str) -> pd.Series:
        """The values of the derived feature ``name`` (text levels or numbers)."""
        for a, b in self.calendar.duration_pairs_:
            if name == duration_name(a, b):
                start, end = self.parsed(a).instant, self.parsed(b).instant
                return ((end - start).dt.total_seconds() / 86_400).astype("float64")
        column, _, part = name.partition(": ")
        parts = self.parts(column)
        index = self.table.frame.index
        if part == "weekday":
            return pd.Series([WEEKDAYS[d] if d >= 0 else None for d in parts.weekday], index=index, dtype="object")
        if part == "period end":
            return pd.Series(parts.period_level(), index=index, dtype="object")
        if part == "hour":
            return pd.Series(parts.hour, index=index, dtype="float64")
        if part == "holiday":
            return pd.Series([None if h is None else (h or "no") for h in parts.holiday], index=index, dtype="object")
        raise KeyError(name)

    def hits(self) -> list[list[dict]]:
        """Per record of the table: the calendar column hits, {column, rule, value, text}, of the timing
        kinds the fitted records rarely show (see :meth:`Calendar._fit_rules`)."""
        cal = self.calendar
        out: list[list[dict]] = [[] for _ in range(self.table.n_rows)]
        for c in cal.columns_:
            parts = self.parts(c)
            rules = cal.rules_[c]
            per_day = rules.get("per working day", 0.0)
            dated = parts.weekday >= 0
            with np.errstate(invalid="ignore"):
                maybe = dated & ((parts.weekday >= 5) | (parts.to_month_end == 0) | (parts.to_year_end == 0)
                                 | (parts.hour < cal.hours[0]) | (parts.hour >= cal.hours[1])
                                 | np.array([bool(h) for h in parts.holiday]))
            for i in np.flatnonzero(maybe).tolist():  # only the records some rule could hit
                day = str(parts.dates[i])
                when = f"{WEEKDAYS[parts.weekday[i]]} {day}"
                found = []
                if "weekend" in rules and parts.weekday[i] >= 5:
                    on, days = rules["weekend"]
                    found.append(("weekend", f"on {when}: {on:,} records on the {days:,} weekend days, against "
                                             f"{per_day:,.1f} a working day"))
                holiday = parts.holiday[i]
                if holiday and holiday in rules.get("holiday", {}):
                    on, days = rules["holiday"][holiday]
                    found.append(("holiday", f"on a public holiday, {holiday} ({when}): {on:,} records on "
                                             f"{'it' if days == 1 else f'its {days} days'}, against "
                                             f"{per_day:,.1f} a working day"))
                if "outside hours" in rules:
                    start, end = cal.hours
                    h = parts.hour[i]
                    if not np.isnan(h) and (h < start or h >= end):
                        on, timed = rules["outside hours"]
                        minutes = int(round(h * 60))
                        found.append(("outside hours", f"at {minutes // 60:02d}:{minutes % 60:02d} on {when}, outside "
                                                       f"the working hours {start}-{end}: {on:,} of {timed:,} records"))
                if "month end" in rules and parts.to_month_end[i] == 0 and parts.weekday[i] < 5:
                    on, days = rules["month end"]
                    found.append(("month end", f"on {when}, the last working day of the month: {on:,} records on "
                                               f"the {days:,} such days, against {per_day:,.1f} a working day"))
                if "year end" in rules and parts.to_year_end[i] == 0:
                    on, dated = rules["year end"]
                    found.append(("year end", f"on {when}, the last working day of the year or after it: {on:,} of "
                                              f"{dated:,} records"))
                out[i] += [{"column": c, "rule": rule, "value": day, "text": text} for rule, text in found]
        return out


def working_days_to_ends(days: np.ndarray, holidays: np.ndarray) -> dict[str, np.ndarray]:
    """For each day (datetime64[D]), the working days after it up to the end of its month, quarter and year
    (0 on the period's last working day and the days after it); working days are Monday to Friday less
    ``holidays`` (numpy's business-day count)."""
    out = {}
    month_start = days.astype("datetime64[M]")
    for label, months in (("month", 1), ("quarter", 3), ("year", 12)):
        if months == 12:
            start = days.astype("datetime64[Y]").astype("datetime64[M]")
        elif months == 3:
            m = month_start.astype(int)
            start = (m - m % 3).astype("datetime64[M]")
        else:
            start = month_start
        end = (start + np.timedelta64(months, "M")).astype("datetime64[D]")  # the first day after the period
        out[label] = np.maximum(np.busday_count(days + np.timedelta64(1, "D"), end, holidays=holidays), 0)
    return out


def _rarely(count: int, units: float, rate: float) -> bool:
    """``count`` records over ``units`` days (hours) are rare against ``rate`` records per working one."""
    from scipy import stats

    expected = rate * units
    return expected > 0 and count <= RARE_RATE * expected and float(stats.poisson.cdf(count, expected)) <= RARE_P


def calendar_columns(table: Table, columns: list[ColumnInfo],
                     options) -> tuple[Calendar, list[ColumnInfo], CalendarView]:
    """The scan's calendar, fitted on ``table`` (the reference in check mode), the column list with a
    feature per calendar part and duration after the date columns they come from, and ``table`` as the fitted
    calendar reads it (its dates parsed once: the preparation and the calendar's hits of the same table reuse
    it)."""
    names = {c.name: c for c in columns}
    named = options.dates if isinstance(options.dates, tuple) else ()
    for name in named:
        info = names.get(name)
        if info is not None and info.role not in (DATE, "key", "excluded"):
            info.role, info.reason = DATE, "dates (named in --dates)"
    detected = [c.name for c in columns if c.role == DATE]
    calendar = Calendar(options.dates if options.dates == "none" else (named or None), options.hours,
                        options.holidays, options.durations, options.dayfirst)
    view = CalendarView(calendar, table)
    calendar.fit(table, detected, view)
    sources = [*calendar.columns_, *(b for _, b in calendar.duration_pairs_)]
    derived: dict[str, list[ColumnInfo]] = {source: [] for source in sources}
    for name, source, kind in calendar.derived():
        values = view.values(name)
        info = ColumnInfo(name, NUMERIC if kind == "numeric" else CATEGORICAL, "calendar",
                          int(values.isna().sum()), int(values.nunique()), _part_reason(name), source)
        derived[source.split(", ")[-1]].append(info)
    out = []
    for info in columns:
        if info.name in calendar.columns_:
            info.reason = f"dates: used through their calendar parts ({', '.join(calendar.parts_[info.name])})"
        out.append(info)
        out += derived.get(info.name, [])
    return calendar, out, view


def _part_reason(name: str) -> str:
    if name.endswith(": days"):
        return "days between two date columns (--durations)"
    column, _, part = name.partition(": ")
    return f"calendar part of {column}"
