"""The HTML report: one self-contained file, summary first and detail after.

No external assets, links or scripts: the CSS is inline and the figures are PNG images embedded as
``data:`` URIs, so the file opens offline and sends nothing anywhere. Every value from the data, the run
record or the review store goes through :mod:`.markup`, which escapes it. The output depends only on the
result, the review store and the generation time, which is written once, in the ``generated`` line.
"""

from __future__ import annotations

import base64

import matplotlib
import numpy as np

from investigator.explain.explanation import Peer, PeerDifference
from investigator.output.explanation import (
    cell_sentence,
    direction_text,
    format_value,
    headline_text,
    nearest_sentence,
    pulling_text,
    typical_text,
    within_sentence,
)
from investigator.output.screens import ScreenLine, amount_lines, out_of_spec_records, record_labels
from investigator.output.screens import number as screen_number
from investigator.output.summary import CAUTION
from investigator.report import plots
from investigator.report.cases import Case, build_cases, column_hits_text, top_text
from investigator.report.markup import Safe, definitions, esc, items, join, share_bar, table, tag
from investigator.report.reviews import Review
from investigator.structure.cases import GroupCase
from investigator.structure.profile import FeatureProfile

TOP_SUMMARY = 10   # cases listed in the summary
TOP_PLOTTED = 10   # cases in the contributions chart
MEMBERS_SHOWN = 20  # members listed per group
SCREEN_RECORDS = 20  # records listed per amount screen (all of them are in the JSON run record)

CAUTIONS = (
    "A flag is a lead for a person to review, not proof of error or fraud. An outlier is a record unlike "
    "the rest; whether it matters is for you to decide, with the record and its context in front of you.",
    "Follow your audit standards or quality system for what to examine, how to document it and who signs "
    "it off.",
    "The methods assume the records are comparable (one kind of transaction, one product); a table mixing "
    "kinds shows the rarer kind as unusual. Records that are not flagged are not thereby cleared.",
    "Everything ran on this machine, and this file contains no links, scripts or external resources: no "
    "data left the machine, and opening the report sends nothing anywhere.",
)

CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,"DejaVu Sans",sans-serif;color:#1d2329;
background:#fff;margin:0;line-height:1.45;font-size:15px}
main{max-width:1180px;margin:0 auto;padding:24px 32px 64px}
h1{font-size:1.7em;margin:0 0 4px}h2{font-size:1.35em;margin:40px 0 10px;padding-top:12px;
border-top:2px solid #d5dbe1}h3{font-size:1.1em;margin:26px 0 6px}h4{font-size:1em;margin:16px 0 4px}
.generated{color:#5b6670;margin:0 0 14px;font-size:.9em}
.caution{background:#fff6e0;border-left:5px solid #e0a500;padding:10px 14px;margin:14px 0}
nav.contents{background:#f3f5f7;padding:8px 14px;margin:14px 0}nav.contents a{margin-right:14px}
dl.facts{display:grid;grid-template-columns:max-content 1fr;gap:3px 18px;margin:8px 0}
dl.facts dt{font-weight:600;color:#3b4650}dl.facts dd{margin:0}
table{border-collapse:collapse;margin:8px 0 14px;font-size:.92em}
th,td{border-bottom:1px solid #e1e5e9;padding:4px 9px;text-align:left;vertical-align:top}
th{background:#eef1f4;font-weight:600}tbody tr:nth-child(even){background:#fafbfc}
td.num,th.num{text-align:right;font-variant-numeric:tabular-nums}.nowrap{white-space:nowrap}
.mono{font-family:"DejaVu Sans Mono",Menlo,Consolas,monospace;font-size:.9em;word-break:break-all}
img.plot{display:block;max-width:100%;height:auto;margin:8px 0 18px;border:1px solid #e1e5e9}
article.case{border:1px solid #d5dbe1;border-radius:4px;padding:4px 16px 10px;margin:18px 0}
.bar{display:inline-block;width:80px;height:9px;background:#e6eaee;vertical-align:middle}
.bar span{display:block;height:100%;background:#3d6fa5}.bar.neg span{background:#9aa5b1}
.verdict{font-weight:600}.changed{color:#a04000;font-weight:600}.muted{color:#5b6670}
p.rule{font-weight:600}
@media print{main{max-width:none;padding:0}h2{break-before:page}article.case{break-inside:avoid}
nav.contents{display:none}}
"""


def render_html(result, review: Review, *, cases: int = 50, generated: str) -> str:
    """The report as one HTML document. ``cases``: how many flagged records are explained in detail."""
    shown = build_cases(result, review, limit=cases)
    flagged = [c for c in shown if c.record["flagged"]]
    n_flagged = int(result.flagged.sum())
    counts = {"flagged": n_flagged, "top": min(cases, n_flagged), "limit": cases,
              "beyond": len(flagged) - min(cases, n_flagged), "others": len(shown) - len(flagged),
              "left": n_flagged - len(flagged)}
    sections = [
        ("summary", "Summary", _summary(result, review, shown, counts, generated)),
        ("scanned", "What was scanned", _scanned(result)),
        ("method", "How it was scanned", _how(result)),
        ("found", "What was found", _found(result, flagged, counts)),
    ]
    if result.within is not None:
        sections.append(("within", "Within segments", _within(result, cases)))
    if result.group_cases:
        sections.append(("groups", "Groups", _groups(result.group_cases, review)))
    coords = _map_coordinates(result)
    if coords is not None:
        sections.append(("map", "Map", _map(result, coords, flagged)))
    sections.append(("verdicts", "Verdicts and notes", _verdicts(result, review)))
    if result.learning is not None:
        sections.append(("next", "What to review next", _review_next(result)))
    sections += [
        ("cases", "The cases in detail", _case_details(result, shown, counts)),
        ("cautions", "Cautions", items(CAUTIONS)),
    ]
    contents = tag("nav", "Contents: ", *(tag("a", title, href=f"#{sid}") for sid, title, _ in sections[1:]),
                   class_="contents")
    body = []
    for n, (sid, title, content) in enumerate(sections):
        if n == 0:
            body.append(tag("section", content, contents, id=sid))
        else:
            body.append(tag("section", tag("h2", title), content, id=sid))
    title = f"Investigation report: {result.table.name}"
    return (
        "<!DOCTYPE html>\n"
        + tag("html",
              tag("head", Safe('<meta charset="utf-8">'),
                  Safe('<meta name="viewport" content="width=device-width, initial-scale=1">'),
                  tag("title", title), tag("style", Safe(CSS))),
              tag("body", tag("main", *body)), lang="en")
        + "\n"
    )


# -- small helpers -------------------------------------------------------------------------------------------


def _img(png: bytes, alt: str, ident: str) -> Safe:
    data = base64.b64encode(png).decode("ascii")
    return Safe(f'<img class="plot" id="{esc(ident)}" alt="{esc(alt)}" src="data:image/png;base64,{data}">')


def _who(record: dict) -> str:
    return f"{record['key']}" if record["key"] == record["row"] else f"{record['key']} (row {record['row']})"


def _plural(n: int, word: str) -> str:
    return f"{n:,} {word}" + ("" if n == 1 else "s")


def _verdict_text(match) -> Safe:
    if match is None:
        return esc("")
    e = match.entry
    parts = [tag("span", e.verdict, class_="verdict")]
    if match.changed:
        parts.append(tag("span", " (record changed since)", class_="changed"))
    return join(parts)


def _kv(mapping: dict | None) -> str:
    if not mapping:
        return ""
    return ", ".join(f"{k}={format_value(v) if isinstance(v, float) else v}" for k, v in mapping.items())


# -- summary -------------------------------------------------------------------------------------------------


def _detail_text(counts: dict) -> str:
    """Which cases are explained in detail, and how many flagged records are left out."""
    text = f"the top {counts['top']:,} of {counts['flagged']:,} flagged records by consensus"
    if counts["beyond"]:
        text += f", {_plural(counts['beyond'], 'more flagged record')} with a verdict"
    if counts["others"]:
        text += f", {_plural(counts['others'], 'record')} with a verdict that the scan does not flag"
    if counts["left"]:
        text += (f"; {counts['left']:,} flagged records left out here (--cases {counts['limit']}; all are in "
                 "the cases table: --out cases.xlsx or cases.csv)")
    return text


def _summary(result, review: Review, shown: list[Case], counts: dict, generated: str) -> Safe:
    run, n = result.run, result.n_records
    src = run.input
    hits = sum(1 for h in result.column_hits if h)
    n_flagged = counts["flagged"]
    facts = [
        ("Data", f"{result.table.name} ({src.format or ''}): {n:,} records, {src.columns} columns, key: {src.key}"),
        ("SHA-256", tag("span", src.sha256 or "(not a file)", class_="mono")),
        ("Features", f"{len(result.features.names)}: " + ", ".join(result.features.names)),
        ("Methods", ", ".join(result.method_results)),
        ("Rule", run.rule),
        ("Flagged", f"{n_flagged:,} of {n:,} records ({n_flagged / n:.1%}); {hits:,} records have column "
                    "hits (per-column rules, reported apart from the flags)"),
        ("Verdicts", _verdict_summary(review)),
        ("In detail below", _detail_text(counts)),
    ]
    top = [c for c in shown if c.record["flagged"]][:TOP_SUMMARY]
    parts = [
        tag("h1", f"Investigation report: {result.table.name}"),
        tag("p", f"Generated {generated} from the scan started {run.started}.", id="generated",
            class_="generated"),
        tag("p", CAUTION, class_="caution"),
        definitions(facts),
    ]
    if top:
        parts.append(tag("h3", f"The {len(top)} most unusual flagged records"))
        parts.append(table(
            ["#", "rank", "row", "key", "consensus", "votes", "why", "stands out in", "verdict"],
            [[tag("a", c.rank, href=f"#{c.anchor}"), f"{c.record['rank']:,}", c.record["row"], c.record["key"],
              f"{c.record['consensus']:.3f}", f"{c.record['votes']}/{len(c.record['flags'])}",
              c.record["flag_reason"] or "", top_text(c.explanation, 3), _verdict_text(c.match)] for c in top],
            numeric=(0, 1, 2, 4, 5), nowrap=(3, 8)))
    else:
        parts.append(tag("p", "No record is flagged."))
    parts.append(_img(plots.consensus_plot(result.consensus, result.flagged),
                      "Histogram of the consensus of all records; flagged records in red", "plot-consensus"))
    return join(parts)


def _verdict_summary(review: Review) -> str:
    if not review.exists:
        where = f" at {review.path}" if review.path is not None else ""
        return f"no review store{where}: no verdicts recorded yet"
    counts = review.counts()
    m = review.matching
    text = f"{sum(counts.values()):,} in force on records of this data"
    if counts:
        text += " (" + ", ".join(f"{v:,} {k}" for k, v in sorted(counts.items())) + ")"
    changed, gone = len(m.changed()), len(m.disappeared)
    text += f"; {changed:,} changed since the verdict; {gone:,} whose record is not in the data"
    if m.groups:
        text += f"; {_plural(len(m.groups), 'group verdict')}"
    return text + f"; {_plural(len(review.history), 'change')} in the history"


# -- what was scanned ----------------------------------------------------------------------------------------


def _scanned(result) -> Safe:
    run = result.run
    src = run.input
    facts = [("File", src.path or "a data frame (no file)"), ("Format", src.format or "")]
    if src.sha256:
        facts.append(("SHA-256 of the file's bytes", tag("span", src.sha256, class_="mono")))
    for value, label in ((src.encoding, "Encoding"), (src.delimiter, "Delimiter"), (src.sheet, "Sheet")):
        if value is not None:
            facts.append((label, value))
    facts += [("Records", f"{src.rows:,}"), ("Columns", src.columns), ("Key", src.key)]
    parts = [definitions(facts)]
    ref = run.reference
    if ref:
        r = ref.input
        parts.append(tag("h3", "Reference"))
        parts.append(definitions([
            ("File", r.path or "a data frame"),
            ("SHA-256", tag("span", r.sha256 or "", class_="mono")),
            ("Records", f"{r.rows or 0:,}, of which {ref.used:,} used; phase I left out {ref.phase_i.excluded:,}"),
        ]))
    parts.append(tag("h3", "Features and how each was prepared"))
    parts.append(table(
        ["feature", "role", "transform", "decision", "missing", "filled with", "centre", "scale"],
        [[f.name, f.role, f.transform, f.decision, f.missing, format_value(f.fill), format_value(f.center),
          f"{format_value(f.scale)} ({f.scale_method})"]
         for f in run.features], numeric=(4, 5, 6)))
    used = {s for c in run.columns if c.source for s in c.source.split(", ")}  # dates used by their parts
    left = [c for c in run.columns if c.name not in set(result.features.names) and c.name not in used]
    if left:
        parts.append(tag("h3", "Columns left out"))
        parts.append(table(["column", "role", "why"], [[c.name, c.role, c.reason] for c in left]))
    parts.append(tag("h3", "Notices"))
    parts.append(items(run.notices) if run.notices else tag("p", "None."))
    return join(parts)


# -- how -----------------------------------------------------------------------------------------------------


def _how(result) -> Safe:
    run = result.run
    parts = [tag("p", "Combination rule: " + run.rule, class_="rule")]
    parts.append(table(
        ["method", "score", "cutoff", "cutoff rule", "parameters"],
        [[k, m.score, format_value(m.cutoff), m.cutoff_rule, _kv(m.parameters)] for k, m in run.method_fits.items()],
        numeric=(2,)))
    if run.neighbors:
        parts.append(tag("p", "Neighbour search: " + _kv(run.neighbors.to_dict())))  # every field, as in JSON
    parts.append(tag("h3", "Column rules (reported as column hits, apart from the flags)"))
    parts.append(items(f"{k}: {v}" for k, v in run.column_rules.items()))
    parts.append(tag("h3", "Options"))
    parts.append(table(["option", "value"], [[k, "(default)" if v is None else _option(v)]
                                             for k, v in run.parameters.items()]))
    parts.append(tag("p", f"Seed: {run.seed}. The same data, options and seed give the same scores "
                          "and flags."))
    versions = {**run.versions, "matplotlib (this report)": matplotlib.__version__}
    parts.append(tag("h3", "Versions"))
    parts.append(table(["package", "version"], list(versions.items())))
    return join(parts)


def _option(value) -> str:
    if isinstance(value, list | tuple):
        return ", ".join(map(str, value))
    return str(value)


# -- what was found ------------------------------------------------------------------------------------------


def _found(result, shown: list[Case], counts: dict) -> Safe:
    n, n_flagged = result.n_records, counts["flagged"]
    results = result.method_results
    voting = [k for k in results if k != "hotelling"]
    votes = np.bincount(result.votes, minlength=len(voting) + 1)
    parts = [tag("p", f"{n_flagged:,} of {n:,} records flagged ({n_flagged / n:.1%})."),
             table(["method", "records above its cutoff", "share"],
                   [[k, f"{int(r.flags.sum()):,}", f"{r.flags.mean():.1%}"] for k, r in results.items()],
                   numeric=(1, 2)),
             table(["votes", "records"], [[v, f"{int(c):,}"] for v, c in enumerate(votes)], numeric=(0, 1))]
    parts.append(_img(plots.method_plots({k: (r.scores, float(np.median(r.cutoffs)), r.flags)
                                          for k, r in results.items()}),
                      "Per method: histogram of the scores with the cutoff as a dashed line", "plot-methods"))
    if shown:
        bars = [(str(c.record["key"]), [(t.feature, t.share) for t in c.explanation.top_features])
                for c in shown[:TOP_PLOTTED]]
        parts.append(_img(plots.contributions_plot(bars),
                          "Bar chart of the feature shares of the top cases", "plot-contributions"))
        parts.append(tag("h3", "Flagged records, most unusual first"))
        parts.append(table(
            ["#", "rank", "row", "key", "consensus", "votes", "why", "above the cutoff of", "stands out in",
             "column hits", "verdict"],
            [[tag("a", c.rank, href=f"#{c.anchor}"), f"{c.record['rank']:,}", c.record["row"], c.record["key"],
              f"{c.record['consensus']:.3f}", f"{c.record['votes']}/{len(voting)}", c.record["flag_reason"] or "",
              ", ".join(k for k in results if c.record["flags"].get(k)), top_text(c.explanation, 3),
              ", ".join(sorted({h["column"] for h in c.record["column_hits"]})), _verdict_text(c.match)]
             for c in shown], numeric=(0, 1, 2, 4, 5), nowrap=(3, 10)))
        if counts["left"]:
            parts.append(tag("p", f"{counts['left']:,} more flagged records are left out of this report "
                                  f"(--cases {counts['limit']}); the cases table (--out cases.xlsx or cases.csv) "
                                  "lists them all.", class_="muted"))
    parts.append(_column_hits(result))
    parts.append(_extras(result))
    return join(parts)


def _column_hits(result) -> Safe:
    counts: dict[tuple[str, str], int] = {}
    for hits in result.column_hits:
        for h in hits:
            counts[(h["column"], h["rule"])] = counts.get((h["column"], h["rule"]), 0) + 1
    with_hits = sum(1 for h in result.column_hits if h)
    head = tag("h3", "Column hits")
    note = tag("p", f"{with_hits:,} records have at least one column hit. A column hit is a value outside a "
                    "per-column rule; it is reported beside the flags and does not vote.")
    if not counts:
        return join([head, note])
    rules = list(result.run.column_rules)
    columns = sorted({c for c, _ in counts})
    return join([head, note, table(["column", *rules],
                                   [[c, *(f"{counts.get((c, r), 0):,}" for r in rules)] for c in columns],
                                   numeric=range(1, len(rules) + 1))])


def _extras(result) -> Safe:
    parts = []
    if result.stability is not None:
        flagged = result.stability[result.flagged]
        stable = int((flagged >= 0.9).sum())
        parts.append(tag("p", f"Stability over {result.options.resamples} resampled runs: {stable:,} of "
                              f"{len(flagged):,} flagged records are flagged in at least 90% of the runs."))
    if result.out_of_spec is not None:
        breaking = sum(1 for h in result.out_of_spec if h)
        labels = record_labels(result.keys, result.table.row_numbers, result.table.key_column)
        named = f": {out_of_spec_records(result.out_of_spec, labels, shown=10)}" if breaking else ""
        parts.append(tag("p", f"Out of specification: {breaking:,} record{'' if breaking == 1 else 's'} "
                              f"break{'s' if breaking == 1 else ''} a --limits limit (a rule breach, kept apart "
                              f"from the statistical flags){named}."))
    screens = result.run.screens or {}  # each check's own report (checks/)
    for col, tests in (screens.get("benford") or {}).items():
        for label, key in (("first digit", "first_digit"), ("first two digits", "first_two_digits")):
            t = tests[key]
            parts.append(tag("p", f"Benford's law, {label}, {col}: MAD {format_value(t['mad'])} ({t['conformity']}), "
                                  f"{t['used']:,} values; most over-represented: "
                                  f"{', '.join(map(str, t['excess_digits']))}."
                                  + (" " + "; ".join(t["warnings"]) if t.get("warnings") else "")))
    for line in amount_lines(screens):  # round amounts, thresholds, last two digits
        parts.append(tag("p", line.with_warnings + "."))
        if line.records:
            parts.append(_screen_records(line))
    for key, label in (("exact_duplicates", "Exact copies"), ("duplicates", "Same values")):
        d = screens.get(key)
        if d:
            on = f" on {', '.join(d['columns'])}" if key == "duplicates" else ""
            parts.append(tag("p", f"{label}{on}: {d['n_groups']:,} groups, {d['records_in_groups']:,} records."))
    if not parts:
        return join([])
    return join([tag("h3", "Other screens"), *parts])


def _screen_records(line: ScreenLine, shown: int = SCREEN_RECORDS) -> Safe:
    """The first records an amount screen lists: key, data row, value and the screen's own field."""
    own = {"round_amounts": ("ending", "ending"), "last_two_digits": ("pair", "last two digits")}.get(line.kind)
    headers = ["key", "row", "value", *([own[1]] if own else [])]
    rows = [[r["key"], f"{r['row']:,}", screen_number(r["value"]), *([r[own[0]]] if own else [])]
            for r in line.records[:shown]]
    more = len(line.records) - shown
    note = tag("p", f"... and {more:,} more records (all in the JSON run record, run.screens.{line.kind}).") \
        if more > 0 else join([])
    return join([table(headers, rows, numeric=(1, 2)), note])


# -- within segments (peer groups, --within) -----------------------------------------------------------------


def _within(result, cases: int) -> Safe:
    """The segments, where each was scored, and the records unusual within their segment but not overall, each
    with its sentence (at most ``cases`` of them, the most unusual within their segment first)."""
    w = result.within
    columns = ", ".join(w.columns)
    only = w.within_only
    parts = [tag("p", f"Every record is also scored against the records of its own segment ({columns}): every "
                      f"method and cutoff fitted on the segment alone (peer group analysis). A segment needs "
                      f"{w.min_records:,} records for a fit of its own; smaller ones are judged against the nearest "
                      f"segment or the whole table. {int(w.flagged.sum()):,} records are flagged within their "
                      f"segment, {int(only.sum()):,} of them not overall."),
             table(["segment", "records", "scored against", "flagged within", "within only"],
                   [[s.label, f"{s.records:,}", s.scored_against or "its own records", f"{s.flagged:,}",
                     f"{s.flagged_within_only:,}"] for s in w.segments], numeric=(1, 3, 4))]
    order = [int(i) for i in np.argsort(-w.consensus_z, kind="stable") if only[i]][:cases]
    if order:
        parts.append(tag("h3", "Unusual within their segment, not overall"))
        rows = [[int(result.table.row_numbers[i]), result.keys[i], w.label(i), f"{w.consensus[i]:.3f}",
                 f"{result.consensus[i]:.3f}", within_sentence(v)] for i, v in zip(order, w.views(order), strict=True)]
        parts.append(table(["row", "key", "segment", "within", "overall", "why"], rows, numeric=(0, 3, 4), nowrap=(1,)))
        if int(only.sum()) > len(order):
            parts.append(tag("p", f"{int(only.sum()) - len(order):,} more are left out (--cases {cases}); the JSON "
                                  "and CSV outputs hold within_flagged for every record.", class_="muted"))
    return join(parts)


# -- groups and map (present when the result has them) -------------------------------------------------------


def _groups(cases: list[GroupCase], review: Review) -> Safe:
    verdicts = {e.case_id: e for e in (review.matching.groups if review.matching is not None else [])}
    parts = [tag("p", f"{_plural(len(cases), 'group')} of records that are unusual together (a pattern, "
                      "rather than a lone record).")]
    for g in cases:
        parts.append(tag("h3", f"Group {g.group}: {_plural(g.size, 'record')}"))
        verdict = verdicts.get(f"group:{g.group}")
        if verdict is not None:
            parts.append(tag("p", "Verdict: ", tag("span", verdict.verdict, class_="verdict"),
                             f" by {verdict.reviewer} at {verdict.at}"
                             + (f"; note: {verdict.note}" if verdict.note else "")))
        keys = g.keys
        listed = keys[:MEMBERS_SHOWN]
        more = f" and {len(keys) - len(listed):,} more" if len(keys) > len(listed) else ""
        parts.append(tag("p", "Members: " + ", ".join(map(str, listed)) + more))
        parts.append(definitions([("flagged", g.flagged)]))
        parts.append(_profile(g.profile))
    return join(parts)


def _profile(profile: tuple[FeatureProfile, ...]) -> Safe:
    """A group's profile as a table, one column per field the profile rows have (as in the JSON)."""
    if not profile:
        return join([])
    rows = [p.to_dict() for p in profile]
    headers: list = []
    for p in rows:
        headers += [k for k in p if k not in headers]
    return table(headers, [[_cell(p.get(h)) for h in headers] for p in rows])


def _cell(value) -> str:
    if isinstance(value, float):
        return format_value(value)
    if isinstance(value, list | tuple):
        return ", ".join(_cell(v) for v in value)
    return "" if value is None else str(value)


def _map_coordinates(result) -> np.ndarray | None:
    """The map's (n, 2) coordinates, whether ``result.map`` is the array or an object holding it."""
    m = getattr(result, "map", None)
    if m is None:
        return None
    for attr in ("xy", "coordinates", "coords", "embedding"):
        if hasattr(m, attr):
            m = getattr(m, attr)
            break
    try:
        xy = np.asarray(m, dtype=float)
    except (TypeError, ValueError):
        return None
    if xy.ndim != 2 or xy.shape != (result.n_records, 2) or not np.isfinite(xy).any():
        return None
    return xy


def _map(result, xy: np.ndarray, shown: list[Case]) -> Safe:
    labels = [(float(xy[c.position, 0]), float(xy[c.position, 1]), str(c.rank)) for c in shown[:TOP_SUMMARY]
              if np.isfinite(xy[c.position]).all()]
    finite = np.isfinite(xy).all(axis=1)
    png = plots.map_plot(xy[finite], result.flagged[finite], labels)
    made = getattr(getattr(result, "map", None), "method", None)
    parts = [tag("p", "Every record on a 2-D map of the prepared features" + (f" ({made})" if made else "")
                 + ": records close together are similar. The numbers are the ranks of the top cases. "
                 "Distances on the map are a guide only; the methods work on the features themselves.")]
    notices = getattr(getattr(result, "map", None), "notices", None)
    if notices:
        parts.append(items(notices))
    parts.append(_img(png, "Map of all records, flagged records in red", "plot-map"))
    return join(parts)


# -- verdicts ------------------------------------------------------------------------------------------------


NEXT_SHOWN = 25


def _review_next(result) -> Safe:
    """The review order learned from the verdicts (docs/learning.md): its first places, with the priority
    beside the consensus and why each record moved."""
    learned = result.learning
    run = result.run.learning or {}
    todo = np.flatnonzero(learned.review_order > 0)
    first = todo[np.argsort(learned.review_order[todo], kind="stable")][:NEXT_SHOWN]
    text = (f"Learned from {_plural(int(run.get('verdicts', 0)), 'verdict')} ({run.get('matters', 0)} confirmed or "
            f"follow-up, {run.get('benign', 0)} benign). The priority is a separate column: flags, consensus and "
            "rank are the scan's own. Nine of ten places go to the most likely remaining anomalies by priority, "
            "every tenth to a record whose verdict would teach the model most (a learning pick). One verdict "
            "moves a record's priority by at most 0.25.")
    rows = [[int(learned.review_order[i]), int(result.table.row_numbers[i]), result.keys[i],
             f"{learned.priority[i]:.3f}", f"{result.consensus[i]:.3f}", int(result.rank[i]), learned.pick[i],
             learned.reason_of(int(i))] for i in first]
    return join([tag("p", text),
                 table(["place", "row", "key", "priority", "consensus", "rank", "pick", "why it moved"], rows,
                       numeric=(0, 1, 3, 4, 5), nowrap=(2,)) if rows else tag("p", "Every record has a verdict.")])


def _verdicts(result, review: Review) -> Safe:
    if not review.exists:
        where = f" at {review.path}" if review.path is not None else ""
        return tag("p", f"There is no review store{where}, so no verdicts or notes are recorded yet. Record one "
                        "with: investigator verdict DATA --key K --set STATE --note TEXT.")
    m, table_ = review.matching, result.table
    how = f"by key ({table_.key_column})" if table_.key_column else "by content (no --id)"
    parts = [definitions([("Review store", tag("span", str(review.path), class_="mono")),
                          ("Changes in the history", f"{len(review.history):,}"),
                          ("Matched to the records", how)])]
    parts.append(tag("h3", "Verdicts in force on the records of this data"))
    rows = []
    for pos, match in sorted(m.matches.items()):
        e = match.entry
        status = "changed since the verdict" if match.changed else "in force"
        if match.copies > 1:
            status += f"; applies to all {match.copies} identical records"
        rows.append([pos + 1, result.keys[pos], tag("span", e.verdict, class_="verdict"), e.note, e.reviewer,
                     e.at, "yes" if result.flagged[pos] else "no", f"{result.consensus[pos]:.3f}",
                     tag("span", status, class_="changed" if match.changed else None)])
    parts.append(table(["row", "key", "verdict", "note", "reviewer", "at", "flagged", "consensus", "status"],
                       rows, numeric=(0, 7), nowrap=(1, 2)) if rows else tag("p", "None."))
    changed = m.changed()
    if changed:
        parts.append(tag("h3", "Records changed since their verdict (the verdict still applies)"))
        for match in changed:
            parts.append(tag("h4", f"Row {match.row}, key {match.key}"))
            parts.append(table(["column", "then", "now"], [[c, _show(a), _show(b)]
                                                            for c, a, b in match.differences()]))
    if m.disappeared:
        parts.append(tag("h3", "Verdicts whose record is not in the data (kept, never dropped)"))
        parts.append(table(
            ["case", "verdict", "note", "reviewer", "at", "why", "the record then"],
            [[_case_label(d.entry.case_id), d.entry.verdict, d.entry.note, d.entry.reviewer, d.entry.at,
              d.reason + (f"; row {d.near_row} differs from it only in {d.near_column}"
                          if d.near_row is not None else ""),
              ", ".join(f"{k}={_show(v)}" for k, v in (d.entry.values or {}).items())]
             for d in m.disappeared]))
    if m.groups:
        parts.append(tag("h3", "Verdicts on groups"))
        parts.append(table(["group", "verdict", "note", "reviewer", "at"],
                           [[e.case_id, e.verdict, e.note, e.reviewer, e.at] for e in m.groups]))
    parts.append(tag("h3", "History (every change, oldest first)"))
    parts.append(table(
        ["#", "at", "reviewer", "case", "row then", "verdict", "note", "run", "data SHA-256"],
        [[e.change, e.at, e.reviewer, _case_label(e.case_id), "" if e.row is None else e.row, e.verdict, e.note,
          e.run_id or "", tag("span", (e.data_sha256 or "")[:12], class_="mono")] for e in review.history],
        numeric=(0, 4)))
    return join(parts)


def _case_label(case_id: str) -> str:
    return case_id[:15] + "..." if case_id.startswith("fp:") else case_id


def _show(value) -> str:
    return "(empty)" if value is None else str(value)


# -- the cases in detail -------------------------------------------------------------------------------------


def _case_details(result, shown: list[Case], counts: dict) -> Safe:
    text = _detail_text(counts)
    parts = [tag("p", text[0].upper() + text[1:] + ".")]
    parts += [_case(result, c) for c in shown]
    return join(parts)


def _peer_value(difference: PeerDifference, peers: tuple[Peer, ...]):
    """The peers' value of a feature: for a category, their commonest level, ties going to the nearest peer.

    Taken from the peers themselves because the explanation breaks such ties in set order, which changes
    from one Python process to the next (string hashing is randomised), and the report must not."""
    if not isinstance(difference.value, str):
        return difference.peers
    levels = [p.values.get(difference.feature) for p in peers]
    return max(levels, key=levels.count)  # max keeps the first of equal counts: the nearest peer's level


def _case(result, c: Case) -> Safe:
    e, r = c.explanation, c.record
    number = f"{c.rank}. " if c.rank is not None else ""
    parts = [tag("h3", f"{number}{_who(r)}", id=c.anchor), tag("p", headline_text(e))]
    if c.match is not None:
        entry = c.match.entry
        text = [tag("span", entry.verdict, class_="verdict"), f" by {entry.reviewer} at {entry.at}"]
        if entry.note:
            text.append(f"; note: {entry.note}")
        if c.match.changed:
            text.append(tag("span", "; the record has changed since the verdict (see Verdicts)",
                            class_="changed"))
        parts.append(tag("p", "Verdict: ", *text))
    if e.cells:  # the values that look wrong come first: they are what a reviewer checks at the source
        parts.append(tag("h4", "Cells that look wrong"))
        parts.append(items(cell_sentence(cell) for cell in e.cells))
    nearest = e.nearest_ordinary
    if nearest:
        prefix = ("No change to one or two features alone brings it under the robust_distance cutoff. "
                  if nearest.features_changed > 2 else "")
        parts.append(tag("p", prefix + nearest_sentence(nearest)))
    if e.stability is not None:
        parts.append(tag("p", f"Flagged in {e.stability:.0%} of {e.resamples} resampled runs."))
    for key, label in (("kind", "Kind of normal (large cluster)"), ("pattern", "Pattern"), ("group", "Group")):
        if r.get(key) is not None:
            parts.append(tag("p", f"{label}: {r[key]}"))
    parts.append(table(
        ["method", "score", "cutoff", "above", "top contributions (share of what pushes it out)"],
        [[k, format_value(m.score), format_value(m.cutoff), "yes" if m.flag else "no",
          ", ".join(f"{x.feature} {x.share:.0%}" for x in e.pushing(k)[:3])]
         for k, m in e.method_scores.items()], numeric=(1, 2)))
    pulling = pulling_text(e)
    if pulling:
        parts.append(tag("p", pulling))
    if e.top_features:
        parts.append(tag("h4", "Features that stand out (across methods)"))
        parts.append(table(
            ["feature", "value", "direction", "typical (quartiles, median)", "robust z", "share", "methods"],
            [[t.feature, format_value(t.value) + (" (imputed)" if t.imputed else ""), direction_text(t),
              typical_text(t.typical), f"{t.robust_z:.1f}", share_bar(t.share), ", ".join(t.methods)]
             for t in e.top_features], numeric=(1, 4), nowrap=(4, 5)))
    if r["column_hits"]:
        parts.append(tag("p", "Column hits: " + column_hits_text(r["column_hits"])))
    peers = e.peers.records
    if peers:
        names = [t.feature for t in e.top_features[:4]] or list(peers[0].values)[:4]
        own = {t.feature: t.value for t in e.top_features}
        source = "reference" if e.peers.source == "reference" else "unflagged"
        parts.append(tag("h4", f"Peers: the {len(peers)} nearest {source} records"))
        rows = [[tag("strong", "this record"), r["key"], "", *(format_value(own.get(n)) for n in names)]]
        rows += [[p.row, p.key, f"{p.distance:.2f}", *(format_value(p.values.get(n)) for n in names)] for p in peers]
        parts.append(table(["row", "key", "distance", *names], rows, numeric=range(0, 3 + len(names)),
                           nowrap=(1,)))
        diffs = e.peers.differences
        if diffs:
            parts.append(tag("p", "Differences from the peers that matter most: " + "; ".join(
                f"{d.feature} {format_value(d.value)} vs {format_value(_peer_value(d, peers))}" for d in diffs) + "."))
    return tag("article", *parts, class_="case")


__all__ = ["CAUTIONS", "render_html"]
