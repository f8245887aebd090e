"""Scan options, shared by the CLI, the API and the TUI so the same options give the same result."""

from __future__ import annotations

import re
from dataclasses import asdict, dataclass

from investigator.checks.thresholds import parse_thresholds
from investigator.errors import InputError
from investigator.io.tables import check_reading_options
from investigator.methods import METHOD_KEYS
from investigator.prepare.calendar import DEFAULT_HOURS, parse_durations, parse_hours

MAP_METHODS = ("none", "auto", "umap", "pca")
# The seed reaches NumPy's legacy RandomState (scikit-learn's and UMAP's random_state), whose seeds are the
# 32-bit unsigned integers (NumPy documentation, numpy.random.RandomState: "must be convertible to 32 bit
# unsigned integers"); the Generator-based draws take any of those too.
SEED_MAX = 2**32 - 1
CELL_SCOPES = ("flagged", "all")


def _names(value, parameter: str) -> tuple[str, ...] | None:
    if value is None:
        return None
    if isinstance(value, str):
        value = value.split(",")
    names = tuple(str(v).strip() for v in value if str(v).strip())
    if not names:
        raise InputError(f"`{parameter}` is empty; give one or more column names separated by commas",
                         parameters=(parameter,))
    return names


@dataclass(frozen=True)
class ScanOptions:
    """Everything that decides a scan's result. Validated on construction; errors say what to change."""

    id: str | None = None
    features: tuple[str, ...] | None = None
    exclude: tuple[str, ...] | None = None
    methods: tuple[str, ...] = METHOD_KEYS
    log: str | tuple[str, ...] = "auto"
    cutoff: float = 0.975
    contamination: float | None = None
    seed: int = 0
    sheet: str | None = None
    decimal: str | None = None
    header_row: int | None = None
    exact: bool = False
    resamples: int = 0
    digits: tuple[str, ...] | None = None
    duplicates: tuple[str, ...] | None = None
    round: tuple[str, ...] | None = None  # round-amount screen on these columns (besides digits, threshold)
    # approval thresholds: (column, threshold, band width or None for 10%), from "amount=5000[:500]" texts
    threshold: tuple[tuple[str, float, float | None], ...] | None = None
    limits: str | None = None
    keep_reference_outliers: bool = False
    map: str = "none"
    cells: str = "flagged"  # which records get cell findings: "flagged" or "all"
    dates: str | tuple[str, ...] | None = None  # date columns for calendar parts: None = detected, "none" = off
    hours: tuple[int, int] = DEFAULT_HOURS  # working hours, from the first up to the second
    holidays: str | None = None  # public holidays of this country (CC or CC-SUBDIV)
    durations: tuple[tuple[str, str], ...] = ()  # (start, end) date columns: end - start in days
    dayfirst: bool | None = None  # day/month dates whose order the values cannot tell
    within: tuple[str, ...] | None = None  # peer groups: score each record within its segment of these columns

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "features", _names(self.features, "features"))
        set_(self, "digits", _names(self.digits, "digits"))
        set_(self, "duplicates", _names(self.duplicates, "duplicates"))
        set_(self, "round", _names(self.round, "round"))
        set_(self, "threshold", parse_thresholds(self.threshold))
        within = _names(self.within, "within")
        set_(self, "within", None if within is None else tuple(dict.fromkeys(within)))  # each column once
        if self.limits is not None:
            set_(self, "limits", str(self.limits))
        set_(self, "exclude", _names(self.exclude, "exclude"))
        methods = _names(self.methods, "methods") or METHOD_KEYS  # None: not given, as for features
        unknown = [m for m in methods if m not in METHOD_KEYS]
        if unknown:
            raise InputError(
                f"`methods`: unknown method '{unknown[0]}'; choose from {', '.join(METHOD_KEYS)}",
                parameters=("methods",),
            )
        # Keep the canonical order so the same set of methods always gives the same output.
        set_(self, "methods", tuple(m for m in METHOD_KEYS if m in methods))
        if isinstance(self.log, str) and self.log.strip().lower() in {"auto", "none"}:
            set_(self, "log", self.log.strip().lower())
        else:
            set_(self, "log", _names(self.log, "log"))
        try:
            set_(self, "cutoff", float(self.cutoff))
        except (TypeError, ValueError):
            raise InputError(f"`cutoff` must be a number between 0.5 and 1, not '{self.cutoff}'",
                             parameters=("cutoff",)) from None
        if not 0.5 < self.cutoff < 1:
            raise InputError(
                f"`cutoff` must be between 0.5 and 1 (a quantile such as 0.975), not {self.cutoff:g}",
                parameters=("cutoff",),
            )
        if self.contamination is not None:
            try:
                set_(self, "contamination", float(self.contamination))
            except (TypeError, ValueError):
                raise InputError(
                    f"`contamination` must be a share between 0 and 0.5, not '{self.contamination}'",
                    parameters=("contamination",),
                ) from None
            if not 0 < self.contamination <= 0.5:
                raise InputError(
                    f"`contamination` must be a share above 0 and at most 0.5 (e.g. 0.01), not "
                    f"{self.contamination:g}",
                    parameters=("contamination",),
                )
        if isinstance(self.seed, bool) or not isinstance(self.seed, int) or not 0 <= self.seed <= SEED_MAX:
            try:
                seed = int(str(self.seed))
            except ValueError:
                seed = -1
            if not 0 <= seed <= SEED_MAX:
                raise InputError(f"`seed` must be a whole number from 0 to {SEED_MAX:,} (2**32 - 1), not "
                                 f"'{self.seed}'", parameters=("seed",))
            set_(self, "seed", seed)

        try:
            resamples = int(self.resamples)
        except (TypeError, ValueError):
            resamples = -1
        fractional = isinstance(self.resamples, float) and not float(self.resamples).is_integer()
        if not 0 <= resamples <= 1000 or fractional:
            raise InputError(f"`resamples` must be a whole number from 0 to 1000, not '{self.resamples}'",
                             parameters=("resamples",))
        set_(self, "resamples", resamples)

        if isinstance(self.header_row, str) and self.header_row.strip().isdigit():
            set_(self, "header_row", int(self.header_row))
        check_reading_options(self.decimal, self.header_row)

        if isinstance(self.dates, str) and self.dates.strip().lower() == "none":
            set_(self, "dates", "none")
        else:
            set_(self, "dates", _names(self.dates, "dates"))
        set_(self, "hours", parse_hours(self.hours))
        if self.holidays is not None:
            code = str(self.holidays).strip()
            if not re.fullmatch(r"[A-Za-z]{2,3}(-[A-Za-z0-9]{1,4})?", code):
                raise InputError(f"`holidays` must be a country code such as US, or a country and subdivision such "
                                 f"as DE-BY, not '{self.holidays}'", parameters=("holidays",))
            set_(self, "holidays", code.upper())
        set_(self, "durations", parse_durations(self.durations))
        if self.dayfirst is not None:
            set_(self, "dayfirst", bool(self.dayfirst))

        if self.cells not in CELL_SCOPES:
            raise InputError(f"`cells` must be one of {', '.join(CELL_SCOPES)}, not '{self.cells}'",
                             parameters=("cells",))
        if self.map not in MAP_METHODS:
            raise InputError(f"`map` must be one of {', '.join(MAP_METHODS)}, not '{self.map}'", parameters=("map",))

    def as_dict(self) -> dict:
        out = asdict(self)
        for k, v in out.items():
            if isinstance(v, tuple):
                out[k] = [list(x) if isinstance(x, tuple) else x for x in v]
        return out
