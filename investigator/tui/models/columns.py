"""The Columns screen's state: which columns are features and which are logged, mapped onto ScanOptions.

Pure logic, no UI: the screen edits a ColumnChoices, the app turns it into the options of the next scan.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

SPARK = "▁▂▃▄▅▆▇█"
FEATURE, EXCLUDED = "feature", "excluded"
# Roles a column can never be switched to feature from: the key names records, an empty column has no values.
LOCKED = ("key", "empty")


@dataclass
class ColumnRow:
    """One line of the Columns screen (computed in the load worker)."""

    name: str
    role: str        # the role inferred (with the command line's --features/--exclude applied)
    dtype: str
    missing: int
    distinct: int
    reason: str
    sketch: str
    numeric: bool    # a log transform can apply
    whole: str = ""  # the sketch with every level name whole (the table's sketch cuts them: "Engineeri…")


LEVEL_WIDTH = 10  # characters of a level's name in the Columns table's sketch (a longer one ends with …)


def sketch(values, width: int = 16, level_width: int | None = LEVEL_WIDTH) -> str:
    """A one-line distribution sketch: a histogram of numbers between the 1st and 99th percentile (values
    outside show as < and > at the ends), or the commonest levels of a category with their shares, each
    name cut to ``level_width`` characters with an ellipsis (None: whole)."""
    # Deferred, here and below: pandas (which the roles module imports) costs 0.6 s, and the app imports this
    # module before its first frame; these functions run in the load worker.
    import pandas as pd

    from investigator.prepare.roles import parse_numeric

    present = values.dropna()
    if len(present) == 0:
        return "(no values)"
    numbers = parse_numeric(present) if not pd.api.types.is_bool_dtype(present) else None
    if numbers is not None and numbers.notna().mean() >= 0.95 and present.nunique() > 2:
        x = numbers.dropna().to_numpy(dtype=float)
        x = x[np.isfinite(x)]
        if len(x) == 0:
            return "(no finite values)"
        lo, hi = np.quantile(x, [0.01, 0.99])
        if hi <= lo:
            return f"mostly {lo:g}"
        counts, _ = np.histogram(np.clip(x, lo, hi), bins=width, range=(lo, hi))
        scaled = np.ceil(counts / counts.max() * (len(SPARK) - 1)).astype(int)
        bars = "".join(SPARK[s] if c else " " for s, c in zip(scaled, counts, strict=True))
        left = "<" if (x < lo).any() else " "
        right = ">" if (x > hi).any() else " "
        return f"{lo:>8.4g} {left}{bars}{right} {hi:<.4g}"
    shares = present.astype(str).value_counts(normalize=True)
    parts = [f"{_cut(str(level), level_width)} {share:.0%}" for level, share in shares.head(3).items()]
    more = len(shares) - 3
    return " · ".join(parts) + (f" · +{more} more" if more > 0 else "")


def _cut(text: str, width: int | None) -> str:
    return text if width is None or len(text) <= width else text[:width - 1] + "…"


def column_rows(table, columns) -> list[ColumnRow]:
    """The rows for every column of ``table``, given the inferred ``columns`` (roles.ColumnInfo)."""
    from investigator.prepare.roles import NUMERIC

    rows = []
    for info in columns:
        values = table.frame[info.name]
        rows.append(ColumnRow(info.name, info.role, info.dtype, info.missing, info.distinct, info.reason,
                              sketch(values), info.role == NUMERIC or _numeric_text(values),
                              sketch(values, level_width=None)))
    return rows


def _numeric_text(values) -> bool:
    from investigator.prepare.roles import parse_numeric

    present = values.dropna()
    return bool(len(present)) and bool(parse_numeric(present).notna().mean() >= 0.95)


@dataclass
class ColumnChoices:
    """What the user decided on the Columns screen. ``use`` per column; ``log`` is None while the scan's own
    decision ("auto") applies, otherwise the exact set of columns to log-transform."""

    rows: list[ColumnRow]
    use: dict[str, bool] = field(default_factory=dict)
    log: set[str] | None = None
    changed_roles: bool = False

    @classmethod
    def start(cls, rows: list[ColumnRow], log_option) -> ColumnChoices:
        use = {r.name: r.role in ("numeric", "categorical") for r in rows}
        log = None if log_option == "auto" else set() if log_option == "none" else set(log_option)
        return cls(rows, use, log)

    def role(self, name: str) -> str:
        row = next(r for r in self.rows if r.name == name)
        if self.use[name]:
            return row.role if row.role in ("numeric", "categorical") else FEATURE
        return row.role if row.role not in ("numeric", "categorical") else EXCLUDED

    def toggle_role(self, name: str) -> str | None:
        """Switch a column between feature and excluded; returns why not, when it cannot be switched."""
        row = next(r for r in self.rows if r.name == name)
        if row.role in LOCKED:
            return f"column '{name}' is the {row.role} column" + (
                " (the record key)" if row.role == "key" else " (no values)") + "; it cannot be a feature"
        self.use[name] = not self.use[name]
        self.changed_roles = True
        return None

    def toggle_log(self, name: str, decided: set[str]) -> str | None:
        """Flip the log transform of one numeric column. The first flip fixes the other columns at what the
        last scan decided (``decided``), so only the column the user touched changes."""
        row = next(r for r in self.rows if r.name == name)
        if not row.numeric:
            return f"column '{name}' is not numeric; a log transform applies to numbers only"
        if self.log is None:
            self.log = set(decided)
        self.log ^= {name}
        return None

    def log_label(self, name: str, decided: set[str]) -> str:
        row = next(r for r in self.rows if r.name == name)
        if not row.numeric:
            return ""
        if self.log is None:
            return "auto: log" if name in decided else "auto"
        return "log" if name in self.log else "no"

    def options(self, base):
        """The ScanOptions of the next scan: ``base`` with the role and log choices applied."""
        changes = {}
        if self.changed_roles:
            changes["features"] = tuple(r.name for r in self.rows if self.use[r.name])
            changes["exclude"] = None
        if self.log is not None:
            logged = tuple(sorted(n for n in self.log if self.use.get(n)))  # only features can be logged
            changes["log"] = logged or "none"
        return replace(base, **changes) if changes else base
