"""The cases table as CSV or XLSX, safe to open in a spreadsheet.

A text cell starting with = + - @, a tab or a carriage return gets a leading apostrophe (OWASP, "CSV
Injection"), through the same ``neutralise`` as the scan's CSV output. In XLSX every text cell is also
written with the string type, so even a cell that slipped through could not be stored as a formula.
"""

from __future__ import annotations

import csv
from pathlib import Path

from openpyxl import Workbook
from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE
from openpyxl.styles import Font

from investigator.io.writers import neutralise

XLSX_CELL_LIMIT = 32_767  # characters in one cell (Excel specifications and limits)


def write_csv(path: Path, headers: list[str], rows: list[list]) -> None:
    with path.open("w", newline="", encoding="utf-8") as f:
        # Every text cell quoted: with "\n" line ends the csv module would leave a bare CR unquoted.
        writer = csv.writer(f, lineterminator="\n", quoting=csv.QUOTE_NONNUMERIC)
        writer.writerow(headers)
        for row in rows:
            writer.writerow(["" if c is None else neutralise(c) for c in row])


def write_xlsx(path: Path, headers: list[str], rows: list[list], *, sheet: str = "cases") -> None:
    book = Workbook()
    ws = book.active
    ws.title = sheet
    ws.append(headers)
    for cell in ws[1]:
        cell.font = Font(bold=True)
    for r, row in enumerate(rows, 2):
        for c, value in enumerate(row, 1):
            if value is None:
                continue
            cell = ws.cell(row=r, column=c)
            if isinstance(value, str):
                # Characters XML cannot hold are shown as escapes; openpyxl would refuse the cell.
                value = ILLEGAL_CHARACTERS_RE.sub(lambda m: m.group().encode("unicode_escape").decode(), value)
                value = neutralise(value)[:XLSX_CELL_LIMIT]
                cell.value = value
                cell.data_type = "s"  # openpyxl takes a text starting with "=" for a formula otherwise
            else:
                cell.value = value
    ws.freeze_panes = "A2"
    book.properties.creator = "investigator"
    book.save(path)

