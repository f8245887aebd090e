"""The short text summary printed by ``investigator scan``.

Names and keys from the data pass through :func:`printable` (terminal control codes escaped) before they
are padded, so the columns stay aligned and a file cannot drive the user's terminal.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from investigator.output.screens import (
    BENFORD_TESTS,
    amount_lines,
    benford_text,
    cautions,
    out_of_spec_records,
    record_labels,
    records_text,
)
from investigator.printable import printable

if TYPE_CHECKING:  # this layer reads the result it is given; it never imports the pipeline
    from investigator.pipeline.dask_engine import DatasetScan
    from investigator.pipeline.result import ScanResult

CAUTION = (
    "Flags are leads for a person to review, not proof of error or fraud; follow your audit standards "
    "or quality system."
)


def _short(value, width: int = 14) -> str:
    text = printable(value)
    return text if len(text) <= width else text[: width - 1] + "~"


def summary_text(result: ScanResult, top: int = 10) -> str:
    run = result.run
    lines = []
    src = run.input
    digest = src.sha256 or ""
    lines.append(f"Scanned {printable(result.table.name)}" + (f" (sha256 {digest[:12]}...)" if digest else ""))
    lines.append(f"{src.rows:,} records, {src.columns} columns, key: {printable(src.key)}")
    feats = []
    for spec in result.features.specs:
        tag = {"log": " (log)", "rarity": " (category)"}.get(spec.transform, "")
        feats.append(printable(spec.name) + tag)
    lines.append(f"Features ({len(feats)}): " + ", ".join(feats))
    used = {s for c in result.columns if c.source for s in c.source.split(", ")}  # dates used by their parts
    left = [f"{printable(c.name)} ({c.role})" for c in result.columns if not c.is_feature and c.name not in used]
    if left:
        lines.append("Left out: " + ", ".join(left))
    lines += _how_scored(run, list(result.method_results), "Notices:")
    sampled = [a.part for a in run.approximations if a.used and a.exact_turns_off]
    if sampled:
        lines.append(f"Sampled for size: {'; '.join(sampled)} (run.approximations says how; --exact turns it off)")
    if run.reference is not None:
        ref = run.reference
        path = ref.input.path if ref.input.path is not None else "a data frame"
        lines.append(f"Reference: {printable(path)}, {ref.used:,} of {ref.input.rows:,} records used (phase I left out "
                     f"{ref.phase_i.excluded:,}); hotelling reported beside the methods, without a vote")
    out_of_spec = result.out_of_spec
    if out_of_spec is not None:
        breaking = sum(1 for h in out_of_spec if h)
        labels = record_labels(result.keys, result.table.row_numbers, result.table.key_column)
        named = f": {printable(out_of_spec_records(out_of_spec, labels))}" if breaking else ""
        lines.append(f"Out of specification: {breaking:,} record{'' if breaking == 1 else 's'} break"
                     f"{'s' if breaking == 1 else ''} a --limits limit (a rule breach, apart from the statistical "
                     f"flags){named}")
    screens = run.screens or {}  # each check's own report (checks/)
    benford = screens.get("benford", {})
    for col, tests in benford.items():
        for label, key in BENFORD_TESTS:
            t = tests[key]
            warn = ("; " + "; ".join(map(printable, t["warnings"]))) if t["warnings"] else ""
            lines.append(printable(benford_text(col, label, t)) + warn)
    if benford:
        lines.append("  " + next(iter(benford.values()))["first_digit"]["caution"])
    amounts = amount_lines(screens)  # round amounts, thresholds, last two digits
    for line in amounts:
        lines.append(printable(line.with_warnings))
        if line.records and line.kind != "last_two_digits":
            lines.append("  listed: " + printable(records_text(line)) + f" (run.screens.{line.kind})")
    lines += ["  " + text for text in cautions(amounts)]
    dup = screens.get("duplicates")
    if dup:
        lines.append(f"Same values on {', '.join(map(printable, dup['columns']))}: {dup['n_groups']:,} groups, "
                     f"{dup['records_in_groups']:,} records")
    n, flagged = result.n_records, int(result.flagged.sum())
    with_hits = sum(1 for h in result.column_hits if h)
    lines.append(
        f"Flagged: {flagged:,} of {n:,} records ({flagged / max(n, 1):.1%}); {with_hits:,} records have column hits"
    )
    if result.within is not None:
        lines += _within_lines(result, top)
    order = [i for i in result.ranking() if result.flagged[i]][:top]
    if order:
        lines.append("")
        lines.append(f"Top {len(order)} flagged records by rank (1 = most unusual):")
        runs = result.options.resamples
        stable_head = f" {'runs':>7}" if result.stability is not None else ""
        lines.append(f"  {'rank':>6} {'row':>6}  {'key':<14} {'consensus':>9} {'votes':>5}{stable_head}  "
                     "why | methods above their cutoff | column hits")
        results = result.method_results
        m = sum(1 for r in results.values() if r.method.votes)  # hotelling does not vote
        for i in order:
            strongest = sorted((k for k, r in results.items() if r.flags[i]), key=lambda k: -results[k].z[i])
            # A calendar hit names its timing ("posted_at weekend"); the rules of numbers, the column.
            cols = sorted({printable(h["column"] + (f" {h['rule']}" if "text" in h else ""))
                           for h in result.column_hits[i]})
            detail = f"{result.flag_reason[i]} | " + ", ".join(strongest) + (f" | {', '.join(cols)}" if cols else "")
            stable = ""
            if result.stability is not None:
                stable = f" {round(result.stability[i] * runs):>3}/{runs:<3}"
            lines.append(
                f"  {result.rank[i]:>6} {int(result.table.row_numbers[i]):>6}  {_short(result.keys[i]):<14} "
                f"{result.consensus[i]:>9.3f} {result.votes[i]:>2}/{m:<2}{stable}  {detail}"
            )
        if result.stability is not None:
            lines.append(f"  runs: resampled runs (of {runs}) that flag the record; below half is unstable")
    if result.learning is not None:
        lines += _review_next_lines(result, top)
    lines.append("")
    lines.append(CAUTION)
    return "\n".join(lines)


def dataset_summary_text(scan: DatasetScan) -> str:
    """The summary of a Dask scan (:class:`investigator.pipeline.dask_engine.DatasetScan`)."""
    run, top = scan.run, scan.top
    src, fitted = run.input, run.fitted
    lines = [f"Scanned {printable(src.path)} on Dask ({run.cluster['scheduler']})",
             f"{src.rows:,} records in {src.partitions} partitions ({src.files} files), key: {printable(src.key)}",
             f"Fitted on a random sample of {run.fit.sample:,} records"]
    feats = [printable(s.name) + {"log": " (log)", "rarity": " (category)"}.get(s.transform, "")
             for s in fitted.features]
    lines.append(f"Features ({len(feats)}): " + ", ".join(feats))
    lines += _how_scored(fitted, list(fitted.methods), "Notices (from the sample):")
    n, flagged = src.rows or 0, run.flagged
    lines.append(f"Flagged: {flagged:,} of {n:,} records ({flagged / n:.1%})")
    if len(top):
        lines += ["", f"Top {len(top)} flagged records by consensus:",
                  f"  {'row':>9}  {'key':<14} {'consensus':>9} {'votes':>5}  top features"]
        m = len(fitted.methods) - ("hotelling" in fitted.methods)
        for r in top.itertuples(index=False):
            lines.append(f"  {r.row:>9}  {_short(r.key):<14} {r.consensus:>9.3f} {r.votes:>2}/{m:<2}  "
                         f"{printable(r.top_features)}")
    lines += ["", f"Results: {scan.out} (Parquet, one file per partition; run record in {scan.out}/_run.json)",
              "", CAUTION]
    return "\n".join(lines)


__all__ = ["CAUTION", "dataset_summary_text", "summary_text"]


def _within_lines(result: ScanResult, top: int) -> list[str]:
    """Peer groups (--within): the segments, how many were fitted on their own, and the records unusual within
    their segment but not overall, the most unusual there first."""
    w = result.within
    assert w is not None
    columns = ", ".join(map(printable, w.columns))
    own = sum(1 for s in w.segments if s.scored_against is None)
    pooled = len(w.segments) - own
    only = w.within_only
    lines = [f"Within segments ({columns}): {len(w.segments):,} segments, {own:,} fitted on their own records "
             f"(at least {w.min_records:,} each)" + (f", {pooled:,} pooled (see the notices)" if pooled else ""),
             f"  {int(only.sum()):,} record{'' if int(only.sum()) == 1 else 's'} unusual within their segment "
             f"({columns}) but not overall; "
             f"{int(w.flagged.sum()):,} flagged within their segment, "
             f"{int((w.overall_flagged & ~w.flagged).sum()):,} flagged overall but ordinary within it"]
    order = [int(i) for i in np.argsort(-w.consensus_z, kind="stable") if only[i]][:top]
    if order:
        lines.append(f"  {'row':>6}  {'key':<14} {'within':>7} {'overall':>7}  segment")
        for i in order:
            lines.append(f"  {int(result.table.row_numbers[i]):>6}  {_short(result.keys[i]):<14} "
                         f"{w.consensus[i]:>7.3f} {result.consensus[i]:>7.3f}  {printable(w.label(i))}")
    return lines


def _review_next_lines(result: ScanResult, top: int) -> list[str]:
    """The review order learned from the verdicts (docs/learning.md): the next records to review, with the
    priority beside the consensus; flags and consensus above are the scan's own."""
    learned = result.learning
    assert learned is not None
    run = result.run.learning or {}
    todo = np.flatnonzero(learned.review_order > 0)
    first = todo[np.argsort(learned.review_order[todo], kind="stable")][:top]
    lines = ["", f"Review next (priority learned from {run.get('verdicts', 0):,} verdicts: {run.get('matters', 0):,} "
                 f"confirmed or follow-up, {run.get('benign', 0):,} benign; flags and consensus above are unchanged; "
                 "--no-learn leaves this out):"]
    if not len(first):
        return [*lines, "  every record has a verdict"]
    lines.append(f"  {'next':>5} {'row':>6}  {'key':<14} {'priority':>8} {'consensus':>9} {'rank':>6}  why it moved")
    for i in first:
        lines.append(f"  {int(learned.review_order[i]):>5} {int(result.table.row_numbers[i]):>6}  "
                     f"{_short(result.keys[i]):<14} {learned.priority[i]:>8.3f} {result.consensus[i]:>9.3f} "
                     f"{int(result.rank[i]):>6}  {printable(learned.reason_of(int(i)))}")
    return lines


def _how_scored(run, methods: list[str], heading: str) -> list[str]:
    """The notices, the methods with the neighbour search, and the flag rule of a run record."""
    lines = [heading, *(f"  - {printable(n)}" for n in run.notices)] if run.notices else []
    nb = run.neighbors
    search = f"; neighbours: {nb.search}, k={nb.k}" if nb else ""
    return [*lines, "Methods: " + ", ".join(methods) + search, "Rule: " + run.rule]
