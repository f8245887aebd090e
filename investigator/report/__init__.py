"""The report of an investigation: one self-contained HTML file, or the cases table for a spreadsheet.

    >>> from investigator.report import write_report
    >>> write_report(result, "report.html")          # summary, method, findings, verdicts, cautions
    >>> write_report(result, "cases.xlsx")           # or .csv: one row per case, spreadsheet-safe

The review store beside the data (or ``store``) is only read, never created or changed. See docs/report.md.
"""

from __future__ import annotations

from datetime import UTC, datetime
from pathlib import Path

from investigator.errors import InputError
from investigator.io.output_files import atomic_output, check_not_input

FORMATS = (".html", ".htm", ".xlsx", ".csv")
DEFAULT_CASES = 50


def check_report_path(path: Path) -> None:
    """Refuse an unusable report path before the scan runs."""
    if path.suffix.lower() not in FORMATS:
        raise InputError(f"out={path}: unknown report format '{path.suffix}'; use one of "
                         f"{', '.join(FORMATS)}", parameters=("out",))
    if not path.parent.is_dir():
        raise InputError(f"out={path}: folder {path.parent} does not exist; create it first", parameters=("out",))
    if path.is_dir():
        raise InputError(f"out={path}: is a folder; give a file name such as report.html", parameters=("out",))


def suffix_html(path: Path) -> bool:
    return path.suffix.lower() in (".html", ".htm")


def write_report(result, out: str | Path, *, cases: int = DEFAULT_CASES, store: str | Path | None = None,
                 generated: str | None = None, columns=None, where: str | None = None) -> Path:
    """Write the report of ``result``; the format follows the extension of ``out``.

    ``cases``: flagged records explained in detail in HTML (the spreadsheet always has every case).
    ``store``: the review store to read (default: the one the scan read, or the one beside the data file).
    ``generated``: the generation time to print (default: now, UTC), the only line that differs between
    two reports of the same scan. For the cases table (.xlsx, .csv) only: ``columns``, the record's input
    columns after the result columns (all by default, empty for none, or those named), and ``where``, an SQL
    WHERE condition on the table's columns (``"amount > 5000 AND vendor = 'Q17'"``): only the cases it holds for.
    """
    # Deferred, here and below: the report's modules import pandas and matplotlib (0.6 s and 0.5 s more), and
    # the CLI imports this package (check_report_path) for `investigator --help` (0.1 s).
    from investigator.report.reviews import read_review

    path = Path(out)
    check_report_path(path)
    if cases < 0:
        raise InputError(f"cases={cases}: give 0 or more (the number of cases explained in detail)",
                         parameters=("cases",))
    if suffix_html(path) and (columns is not None or where is not None):
        given = "columns" if columns is not None else "where"
        raise InputError(f"`{given}` applies to the cases table (out=cases.xlsx or cases.csv); the HTML report "
                         "shows every case as it is", parameters=(given, "out"))
    if where is not None or columns is not None:
        # Deferred as below: the output layer imports pandas (0.6 s).
        from investigator.output.columns import choose_columns
        from investigator.output.where import parse_where

        if where is not None:
            parse_where(where)  # a bad condition, or an unknown column, stops before any writing
        choose_columns(result.table, columns)
    review = read_review(result, store)
    # Deferred as above: the output layer, which lists a scan's inputs, imports pandas (0.6 s).
    from investigator.output.records import result_inputs

    check_not_input(path, [*result_inputs(result), ("review store", review.path)], parameter="out")
    suffix = path.suffix.lower()
    with atomic_output(path, parameter="out") as tmp:  # never a half-written report under the real name
        if suffix in (".html", ".htm"):
            from investigator.report.html import render_html

            when = generated or datetime.now(UTC).replace(microsecond=0).isoformat()
            tmp.write_text(render_html(result, review, cases=cases, generated=when), encoding="utf-8")
        else:
            from investigator.report.cases import build_cases, filter_cases, table_rows
            from investigator.report.sheet import write_csv, write_xlsx

            chosen = build_cases(result, review)
            if where is not None:
                chosen = filter_cases(result, chosen, where)
            headers, rows = table_rows(result, chosen, columns)
            (write_csv if suffix == ".csv" else write_xlsx)(tmp, headers, rows)
    return path


__all__ = ["DEFAULT_CASES", "FORMATS", "check_report_path", "write_report"]
