"""The screens' results in words: one sentence per result, read from ``run.screens`` (the JSON form).

Shared by the text summary, the HTML report and the workspace, so the three say the same. The sentences hold
column names and keys as they are: each caller makes them safe for where they are shown (``printable`` on a
terminal, escaping in HTML, ``plain`` in the workspace).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

BENFORD_TESTS = (("first digit", "first_digit"), ("first two digits", "first_two_digits"))


@dataclass(frozen=True)
class ScreenLine:
    """One screen result: its sentence, its warnings and the records it lists (dicts with position, row, key,
    value and the screen's own field, as in the JSON)."""

    kind: str        # the key in run.screens
    text: str
    warnings: tuple[str, ...] = ()
    records: tuple[dict, ...] = field(default_factory=tuple)
    label: str = ""  # what the screen says of each record it lists, e.g. "round amount (amount)"
    caution: str = ""

    @property
    def with_warnings(self) -> str:
        return self.text + ("; " + "; ".join(self.warnings) if self.warnings else "")


def number(value) -> str:
    """An amount or a threshold for a person: thousands separated, up to 10 significant digits."""
    if value is None:
        return "-"
    value = float(value)
    if not math.isfinite(value):
        return str(value)
    return f"{value:,.10g}"


def p_text(p) -> str:
    return "not tested" if p is None else f"p = {p:.2g}"


def benford_text(column: str, label: str, t: dict) -> str:
    """The summary's sentence for one Benford test (``t``: one test's dict)."""
    return (f"Benford {label}, {column}: MAD {t['mad']:.4f} ({t['conformity']}), {t['used']:,} values; most "
            f"over-represented: {', '.join(map(str, t['excess_digits']))}")


def last_digits_line(column: str, d: dict) -> ScreenLine:
    if d["chi2"] is None:
        text = f"Last two digits, {column}: not tested"
    else:
        pairs = ", ".join(d["excess_pairs"]) or "none"
        text = (f"Last two digits, {column}: chi-square {d['chi2']:.1f} (df {d['df']}, {p_text(d['p_value'])}) on "
                f"{d['used']:,} amounts of 10 or more; most over-represented: {pairs} "
                f"({len(d['records']):,} records)")
    return ScreenLine("last_two_digits", text, tuple(d["warnings"]), tuple(d["records"]),
                      f"last two digits over-represented ({column})", d["caution"])


def round_line(column: str, d: dict) -> ScreenLine:
    texts = []
    for level in d["levels"]:
        expected = ("" if level["expected_count"] is None
                    else f" (expected {level['expected_count']:.1f}, {p_text(level['p_value'])})")
        texts.append((level["count"], level["ending"], expected))
    (n00, e00, x00), (n000, e000, x000) = texts
    ends = "ends" if n00 == 1 else "end"
    cents = f"; {d['with_cents']:,} amounts with cents are not round" if d["with_cents"] else ""
    text = (f"Round amounts, {column}: {n00:,} of {d['whole_units']:,} whole-unit amounts {ends} in {e00}{x00}, "
            f"{n000:,} in {e000}{x000}{cents}")
    return ScreenLine("round_amounts", text, tuple(d["warnings"]), tuple(d["records"]), f"round amount ({column})",
                      d["caution"])


def threshold_line(d: dict) -> ScreenLine:
    t, w = d["threshold"], d["width"]
    share = "" if d["share_below"] is None else f"{d['share_below']:.0%} below, "
    how = "" if d["width_from"] == "given" else f", {d['width_from']}"
    text = (f"Just below {d['column']} {number(t)}: {d['below']:,} records from {number(t - w)} to under "
            f"{number(t)} against {d['above']:,} from {number(t)} to under {number(t + w)} (band {number(w)}{how}; "
            f"{share}{p_text(d['p_value'])}; next bands out: {d['next_below']:,} below, {d['next_above']:,} above)")
    return ScreenLine("thresholds", text, tuple(d["warnings"]), tuple(d["records"]),
                      f"just below {d['column']} {number(t)}", d["caution"])


def amount_lines(screens: dict | None) -> list[ScreenLine]:
    """The round-amount, threshold and last-two-digits results of ``run.screens``, in that order."""
    screens = screens or {}
    lines = [round_line(col, d) for col, d in (screens.get("round_amounts") or {}).items()]
    lines += [threshold_line(d) for d in screens.get("thresholds") or ()]
    lines += [last_digits_line(col, d) for col, d in (screens.get("last_two_digits") or {}).items()]
    return lines


def all_lines(screens: dict | None) -> list[ScreenLine]:
    """Every screen of ``run.screens`` in words: Benford's law, the amount screens and the duplicates."""
    screens = screens or {}
    lines = [ScreenLine("benford", benford_text(col, label, tests[key]), tuple(tests[key]["warnings"]),
                        caution=tests[key]["caution"])
             for col, tests in (screens.get("benford") or {}).items() for label, key in BENFORD_TESTS]
    lines += amount_lines(screens)
    for key, label in (("exact_duplicates", "Exact copies"), ("duplicates", "Same values")):
        d = screens.get(key)
        if d:
            on = f" on {', '.join(d['columns'])}" if key == "duplicates" else ""
            lines.append(ScreenLine(key, f"{label}{on}: {d['n_groups']:,} groups, {d['records_in_groups']:,} records"))
    return lines


def records_text(line: ScreenLine, shown: int = 5) -> str:
    """The first ``shown`` records a screen lists, as key and value, with how many more there are."""
    first = ", ".join(f"{r['key']} ({number(r['value'])})" for r in line.records[:shown])
    more = len(line.records) - shown
    return first + (f" and {more:,} more" if more > 0 else "")


def breach_text(hits: list[dict]) -> str:
    """What one record breaks of the --limits limits (its ``out_of_spec``), e.g. "amount 512 above 500"."""
    return "; ".join(f"{h['column']} {number(h['value'])} {h['side']} "
                     f"{number(h['upper'] if h['side'] == 'above' else h['lower'])}" for h in hits)


def out_of_spec_records(out_of_spec: list[list[dict]], labels: list, shown: int = 5, *, details: bool = True) -> str:
    """The records that break a --limits limit, in file order: the first ``shown`` by ``labels`` (a record's
    key, or "row N"), each with what it breaks when ``details``, and how many more there are."""
    breaking = [i for i, hits in enumerate(out_of_spec) if hits]
    first = ", ".join(f"{labels[i]} ({breach_text(out_of_spec[i])})" if details else str(labels[i])
                      for i in breaking[:shown])
    more = len(breaking) - shown
    return first + (f" and {more:,} more" if more > 0 else "")


def record_labels(keys, rows, key_column: str | None) -> list[str]:
    """How a record is named in a sentence: its key, or "row N" when the table has no key column."""
    if key_column is None:
        return [f"row {int(r)}" for r in rows]
    return [str(k) for k in keys]


def listed_by_position(screens: dict | None) -> dict[int, list[str]]:
    """For each record position an amount screen lists, what the screens say of it (e.g. "round amount
    (amount)"), in the order of :func:`amount_lines`."""
    out: dict[int, list[str]] = {}
    for line in amount_lines(screens):
        for r in line.records:
            out.setdefault(int(r["position"]), []).append(line.label)
    return out


def cautions(lines: list[ScreenLine]) -> list[str]:
    """The caution of each kind of screen among ``lines``, once each, in order."""
    return list(dict.fromkeys(line.caution for line in lines if line.caution))
