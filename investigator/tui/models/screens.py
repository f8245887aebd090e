"""The Screens view's text: every screen of the last scan (Benford's law, round amounts, thresholds, the
last two digits, duplicates) in the words the summary and the report use, with the records each lists.

Pure logic, no UI; the sentences come from :mod:`investigator.output.screens`.
"""

from __future__ import annotations

from investigator.output.screens import all_lines, cautions, listed_by_position, records_text

RECORDS_SHOWN = 10  # records named per screen; all of them are in the JSON run record

NONE = ("No screens in this scan. Start the workspace with --digits COL, --threshold COL=VALUE, --round COL "
        "or --duplicates A,B (as for scan) to run them; exact copies are always looked for.")


def screens_text(screens: dict | None) -> str:
    """The Screens view: one paragraph per screen result, then the cautions."""
    lines = all_lines(screens)
    if not lines:
        return NONE
    out = []
    for line in lines:
        out.append(line.with_warnings)
        if line.records:
            out.append(f"  records: {records_text(line, RECORDS_SHOWN)}")
        out.append("")
    out += cautions(lines)
    return "\n".join(out).rstrip()


def screen_marks(screens: dict | None) -> dict[int, list[str]]:
    """What the amount screens say of each record they list, by position (for the Cases detail line)."""
    return listed_by_position(screens)
