"""An explanation as terminal text: one sentence first, then the tables.

Feature names, keys and values from the data are shown through :func:`printable` (terminal control codes
escaped, the rest as it is) before they are padded; :func:`format_value` itself keeps the value as it is,
for the report and the cases table, which escape for their own formats.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from investigator.explain.explanation import (
    WHOLE_TABLE,
    Explanation,
    NearestOrdinary,
    TopFeature,
    Typical,
    TypicalLevel,
    WithinSegment,
)
from investigator.printable import printable

if TYPE_CHECKING:  # for annotations only: the cell finder imports SciPy and pandas (1.8 s), which the
    # workspace's first frame and `investigator --help` must not wait for
    from investigator.explain.cells import CellFinding

# How often a flag recurs over resampled runs (--resamples) for it to be called stable or unstable.
STABLE = 0.9
UNSTABLE = 0.5


def stability_label(share: float) -> str:
    if share >= STABLE:
        return "stable"
    if share < UNSTABLE:
        return "unstable"
    return "borderline"


def format_value(value) -> str:
    """A value for a person to read: missing as "(missing)", floats to four significant digits (large ones
    whole, with thousands separators), anything else as its text."""
    if value is None:
        return "(missing)"
    if isinstance(value, float):
        if value != value:
            return "(missing)"
        return f"{value:,.4g}" if abs(value) < 1e4 else f"{value:,.0f}"
    return str(value)


def shown_value(value) -> str:
    """:func:`format_value` fit for a terminal: control codes escaped."""
    return printable(format_value(value))


def typical_text(t: Typical) -> str:
    """A typical range in words: the commonest level and its share, or the quartiles and the median, with
    the records they come from when that is the record's own category (or a word on why it is not)."""
    if isinstance(t, TypicalLevel):
        return f"mostly {t.level} ({t.share:.0%})"
    text = f"{format_value(t.q1)} to {format_value(t.q3)} (median {format_value(t.median)})"
    if t.group is not None:
        return f"{text} for {t.group} = {t.level}"
    if t.note:
        return f"{text}; {t.note}"
    return text


def direction_text(t: TopFeature) -> str:
    """A feature's direction in words: outside its typical range (higher / lower), within it, unusual in
    combination with another feature (inside its range, yet a large share), or a rare or common level."""
    if t.direction in ("higher", "lower"):
        return f"{t.direction} than typical"
    if t.direction == "combination":
        return f"unusual in combination with {t.with_feature}" if t.with_feature else "unusual in combination"
    if t.direction == "rarer":
        return "a level rarer than typical"
    if t.direction == "common":
        return "a common level"
    return "within the typical range"


def _reason(t: TopFeature, e: Explanation) -> str | None:
    """One top feature as a reason in the first sentence (None for one within its range)."""
    if t.direction == "rarer":
        return f"{t.feature} has a rare value ({format_value(t.value)}; typical: {typical_text(t.typical)})"
    if t.direction in ("higher", "lower"):
        return (f"{t.feature} is {t.direction} than typical ({format_value(t.value)}; typical: "
                f"{typical_text(t.typical)})")
    if t.direction == "combination":
        other = next((o for o in e.top_features if o.feature == t.with_feature), None)
        beside = f" while {other.feature} is {format_value(other.value)}" if other is not None else ""
        alone = ("a common level on its own" if isinstance(t.typical, TypicalLevel)
                 else f"within its typical range on its own, {typical_text(t.typical)}")
        return (f"{t.feature} is unusual in combination with {t.with_feature} ({format_value(t.value)}{beside}; "
                f"{alone})")
    return None


def pulling_text(e: Explanation) -> str | None:
    """The features that pull the record toward ordinary, per method, as a plain sentence (None if none)."""
    parts, count = [], 0
    for key in e.method_scores:
        names = [c.feature for c in e.pulling(key)[:3]]
        if names:
            verb = "makes" if len(names) == 1 else "make"
            parts.append(f"{', '.join(names)} {verb} it look more ordinary to {key}")
            count += len(names)

    if not parts:
        return None
    these = "its value brings" if count == 1 else "these values bring"
    return ("Pulling toward ordinary: " + "; ".join(parts) + f" (given the other features, {these} the record "
            "closer to the centre; shares are of what pushes the record out).")


def nearest_sentence(nearest: NearestOrdinary) -> str:
    """The smallest change in one sentence (kept within the observed range, whole numbers kept whole), or
    the closest change found when none within those limits brings the record under the cutoff."""
    change = " and ".join(f"{c.feature} {format_value(c.after)} instead of {format_value(c.before)}"
                          for c in nearest.changes)
    numbers = (f"(distance {nearest.distance_before:.1f} -> {nearest.distance_after:.1f}, cutoff "
               f"{nearest.cutoff:.2f})")
    if not nearest.reaches_cutoff:
        return ("No change within the observed range of ordinary records (whole numbers kept whole) brings it "
                f"under the robust_distance cutoff; the closest found: {change} {numbers}.")
    return f"Smallest change found that brings it under the robust_distance cutoff: {change} {numbers}."


def headline_text(e: Explanation) -> str:
    """The first sentence of an explanation: flagged or not and why, rank and consensus, the main reasons."""
    m = len(e.method_scores)
    who = f"Record {printable(e.key)}" + (f" (row {e.row})" if e.key != e.row else "")
    why = e.flag_reason or ""
    if e.flagged and why.startswith("far beyond ") and why != "far beyond combined":
        names = why.removeprefix("far beyond ")
        lead = (f"{who} is flagged: {names} puts it far beyond its cutoff (beyond the far-out fence of its "
                f"scores), though only {e.votes} of {m} methods put it above their cutoff")
    elif e.flagged and why == "far beyond combined":
        lead = (f"{who} is flagged: the methods' evidence together is far beyond that of ordinary records, "
                f"though only {e.votes} of {m} methods put it above their cutoff")
    elif e.flagged:
        lead = f"{who} is flagged: {e.votes} of {m} methods put it above their cutoff"
    elif e.votes:
        lead = f"{who} is not flagged: only {e.votes} of {m} methods put it above their cutoff"
    else:
        lead = f"{who} is not flagged: no method puts it above its cutoff"
    rank = f"rank {e.rank:,}, " if e.rank is not None else ""
    lead += f" ({rank}consensus {e.consensus:.3f})."
    parts = [p for p in (_reason(t, e) for t in e.top_features[:2]) if p]
    if parts:
        intro = " It stands out mainly because " if e.votes else " Its largest deviations: "
        lead += intro + " and ".join(parts) + "."
    return printable(lead)


def column_hit_text(h: dict) -> str:
    """One column hit in words: "amount: three_sigma (270,268 is above 185,828)", or for a calendar rule
    "posting_date: weekend (on Sunday 2025-03-09: 3 of 3,008 records fall on a weekend)"."""
    if "text" in h:
        return f"{h['column']}: {h['rule']} ({h['text']})"
    side = "above" if h["side"] == "upper" else "below"
    return f"{h['column']}: {h['rule']} ({shown_value(h['value'])} is {side} {shown_value(h['limit'])})"


def _within_reason(t: TopFeature, segment: str) -> str | None:
    """One feature that stands out within the record's segment, in words."""
    value = format_value(t.value)
    if t.direction in ("higher", "lower"):
        return (f"{t.feature} is {t.direction} than is typical for {segment} ({value}; typical there: "
                f"{typical_text(t.typical)})")
    if t.direction == "rarer":
        return f"{t.feature} has a value rare for {segment} ({value}; typical there: {typical_text(t.typical)})"
    if t.direction == "combination":
        partner = f" with {t.with_feature}" if t.with_feature else ""
        return f"{t.feature} is unusual in combination{partner} for {segment} ({value})"
    return None


def within_sentence(w: WithinSegment) -> str:
    """The record as its own segment judges it (peer groups): "Within its segment (category = stationery, 300
    records): unusual for category = stationery, 4 of 4 methods put it above their cutoff there (consensus
    0.912); mainly unit_price is higher than is typical for category = stationery (900; typical there: ...)".
    A segment too small for a fit of its own says so, and where it was judged instead."""
    where = f"{w.segment}: {w.reason}" if w.reason else f"{w.segment}, {w.records:,} records"
    if w.scored_against == WHOLE_TABLE:
        return printable(f"Within its segment ({where}): judged as in the whole table.")
    beside = w.segment if w.scored_against is None else w.scored_against
    word = "for" if w.scored_against is None else "beside"
    counted = (f"{w.votes} of {w.methods_voting} methods put it above their cutoff there (consensus "
               f"{w.consensus:.3f})")
    if not w.flagged:
        return printable(f"Within its segment ({where}): not unusual {word} {beside}; {counted}.")
    how = f", flagged as {w.flag_reason}" if w.flag_reason and w.flag_reason != "votes" else ""
    text = f"Within its segment ({where}): unusual {word} {beside}, {counted}{how}"
    reasons = [r for r in (_within_reason(t, w.segment) for t in w.top_features[:2]) if r]
    if reasons:
        text += "; mainly " + " and ".join(reasons)
    return printable(text + ".")


def cell_sentence(c: CellFinding) -> str:
    """One cell finding in words: "amount 3,855 where this record's other values predict about 38.55
    (residual 41.2): a factor of 100 too high: a misplaced decimal point?"."""
    if c.residual is None:  # a level rare given another column: the hint says it all
        return f"{c.hint}."
    text = (f"{c.column} {format_value(c.value)} where this record's other values predict about "
            f"{format_value(c.expected)} (residual {c.residual:,.1f})")
    text += f": {c.hint}" if c.hint else ""
    return text if text.endswith("?") else text + "."


def cell_lines(e: Explanation) -> list[str]:
    """The cells that deviate from what the record's other values predict, one line each."""
    lines = [f"  {cell_sentence(c)}" for c in e.cells]
    return ["Cells that look wrong", *lines] if lines else []


def explanation_text(e: Explanation) -> str:
    lines = [headline_text(e)]
    if e.within is not None:
        lines.append(within_sentence(e.within))
    lines += cell_lines(e)
    if e.stability is not None and e.resamples is not None:
        runs = e.resamples
        seen = round(e.stability * runs)
        lines.append(f"Flagged in {seen} of {runs} resampled runs: {stability_label(e.stability)}.")
    nearest = e.nearest_ordinary
    if nearest:
        if nearest.features_changed > 2:
            lines.append("No change to one or two features alone brings it under the robust_distance cutoff.")
        lines.append(nearest_sentence(nearest))
    elif e.flagged_by("robust_distance"):
        lines.append("No change to the features robust_distance uses brings it under its cutoff.")
    lines += ["", "Methods (shares of what pushes the record out)",
              f"  {'method':<18} {'score':>10} {'cutoff':>10}  flag  top features"]
    for key, m in e.method_scores.items():
        tops = ", ".join(f"{c.feature} {c.share:.0%}" for c in e.pushing(key)[:3])
        flag = "yes" if m.flag else "no"
        lines.append(f"  {key:<18} {m.score:>10.4g} {m.cutoff:>10.4g}  {flag:<4}  {tops}")
    pulling = pulling_text(e)
    if pulling:
        lines.append("  " + pulling)
    if e.top_features:
        lines += ["", "Features that stand out (across methods)",
                  f"  {'feature':<16} {'value':>12}  {'direction':<34} {'z':>6} {'share':>6}  methods  typical"]
        for t in e.top_features:
            lines.append(f"  {t.feature:<16} {format_value(t.value):>12}  {direction_text(t):<34} "
                         f"{t.robust_z:>6.1f} {t.share:>6.0%}  {', '.join(t.methods) or '-'}  "
                         f"{typical_text(t.typical)}")
    if e.column_hits:
        lines += ["", "Column hits"]
        for h in e.column_hits:
            lines.append("  " + printable(column_hit_text(h)))
    peers = e.peers.records
    if peers:
        names = [t.feature for t in e.top_features[:4]] or list(peers[0].values)[:4]
        lines += ["", f"Peers: the {len(peers)} nearest unflagged records",
                  f"  {'row':>6} {'key':<14} {'distance':>8}  "
                  + "  ".join(f"{printable(n)[:12]:>12}" for n in names)]
        own = {t.feature: t.value for t in e.top_features}
        lines.append(f"  {'this':>6} {printable(e.key)[:14]:<14} {'':>8}  "
                     + "  ".join(f"{shown_value(own.get(n)):>12}" for n in names))
        for p in peers:
            lines.append(f"  {p.row:>6} {printable(p.key)[:14]:<14} {p.distance:>8.2f}  "
                         + "  ".join(f"{shown_value(p.values.get(n)):>12}" for n in names))
        diffs = e.peers.differences
        if diffs:
            lines.append("  Differences that matter most: " + "; ".join(
                f"{printable(d.feature)} {shown_value(d.value)} vs {shown_value(d.peers)}" for d in diffs))
    lines += ["", "A flag is a lead for a person to review, not proof of error or fraud."]
    # Every line once more through printable: the sentences above quote names and values (escaping twice is
    # harmless, since an escaped text is all printable).
    return "\n".join(printable(line) for line in lines)
