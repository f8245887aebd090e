"""An explanation as terminal text: one sentence first, then the tables."""

from __future__ import annotations

from investigator.explain.explanation import Explanation, Typical, TypicalLevel

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


def typical_text(t: Typical) -> str:
    """A typical range in words: the commonest level and its share, or the median and the quartiles."""
    if isinstance(t, TypicalLevel):
        return f"mostly {t.level} ({t.share:.0%})"
    return f"{format_value(t.median)} ({format_value(t.q1)} to {format_value(t.q3)})"


def headline_text(e: Explanation) -> str:
    """The first sentence of an explanation: flagged or not and why, rank and consensus, the main reasons."""
    m = len(e.method_scores)
    who = f"Record {e.key}" + (f" (row {e.row})" if e.key != e.row else "")
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
    parts = []
    for t in e.top_features[:2]:
        if t.direction == "rarer":
            parts.append(f"{t.feature} has a rare value ({format_value(t.value)}; typical: {typical_text(t.typical)})")
        elif t.direction in ("higher", "lower") and isinstance(t.typical, TypicalLevel):
            # A number where ordinary records have none (a sparse column): there is no median to compare.
            parts.append(f"{t.feature} has a value ({format_value(t.value)}) where ordinary records have none")
        elif t.direction in ("higher", "lower"):
            parts.append(f"{t.feature} is {t.direction} than typical ({format_value(t.value)} against "
                         f"a median of {format_value(t.typical.median)})")
    if parts:
        intro = " It stands out mainly because " if e.votes else " Its largest deviations: "
        lead += intro + " and ".join(parts) + "."
    return lead


def explanation_text(e: Explanation) -> str:
    lines = [headline_text(e)]
    if e.stability is not None and e.resamples is not None:
        runs = e.resamples
        seen = round(e.stability * runs)
        lines.append(f"Flagged in {seen} of {runs} resampled runs: {stability_label(e.stability)}.")
    nearest = e.nearest_ordinary
    if nearest:
        change = " and ".join(f"{c.feature} {format_value(c.after)} instead of {format_value(c.before)}"
                          for c in nearest.changes)
        if nearest.features_changed > 2:
            lines.append("No change to one or two features alone brings it under the robust_distance cutoff.")
        lines.append(f"Smallest change found that brings it under the robust_distance cutoff: {change} "
                     f"(distance {nearest.distance_before:.1f} -> {nearest.distance_after:.1f}, cutoff "
                     f"{nearest.cutoff:.2f}).")
    elif e.flagged_by("robust_distance"):
        lines.append("No change to the features robust_distance uses brings it under its cutoff.")
    lines += ["", "Methods", f"  {'method':<18} {'score':>10} {'cutoff':>10}  flag  top features"]
    for key, m in e.method_scores.items():
        tops = ", ".join(f"{c.feature} {c.share:.0%}" for c in e.contributions_of(key)[:3])
        flag = "yes" if m.flag else "no"
        lines.append(f"  {key:<18} {m.score:>10.4g} {m.cutoff:>10.4g}  {flag:<4}  {tops}")
    if any(c.share < 0 for c in e.contributions_of("robust_distance")):
        lines.append("  (a negative robust_distance share: given the other features, this one brings the "
                     "record closer to the centre)")
    if e.top_features:
        lines += ["", "Features that stand out (across methods)",
                  f"  {'feature':<16} {'value':>12}  {'direction':<9} {'typical (median, IQR)':<28} "
                  f"{'z':>6} {'share':>6}  methods"]
        for t in e.top_features:
            lines.append(f"  {t.feature:<16} {format_value(t.value):>12}  {t.direction:<9} "
                         f"{typical_text(t.typical):<28} {t.robust_z:>6.1f} {t.share:>6.0%}  "
                         f"{', '.join(t.methods)}")
    if e.column_hits:
        lines += ["", "Column hits"]
        for h in e.column_hits:
            side = "above" if h["side"] == "upper" else "below"
            lines.append(f"  {h['column']}: {h['rule']} ({format_value(h['value'])} is {side} "
                         f"{format_value(h['limit'])})")
    peers = e.peers.records
    if peers:
        names = [t.feature for t in e.top_features[:4]] or list(peers[0].values)[:4]
        lines += ["", f"Peers: the {len(peers)} nearest unflagged records",
                  f"  {'row':>6} {'key':<14} {'distance':>8}  " + "  ".join(f"{n[:12]:>12}" for n in names)]
        own = {t.feature: t.value for t in e.top_features}
        lines.append(f"  {'this':>6} {str(e.key)[:14]:<14} {'':>8}  "
                     + "  ".join(f"{format_value(own.get(n)):>12}" for n in names))
        for p in peers:
            lines.append(f"  {p.row:>6} {str(p.key)[:14]:<14} {p.distance:>8.2f}  "
                         + "  ".join(f"{format_value(p.values.get(n)):>12}" for n in names))
        diffs = e.peers.differences
        if diffs:
            lines.append("  Differences that matter most: " + "; ".join(
                f"{d.feature} {format_value(d.value)} vs {format_value(d.peers)}" for d in diffs))
    lines += ["", "A flag is a lead for a person to review, not proof of error or fraud."]
    return "\n".join(lines)
