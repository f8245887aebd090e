"""Loading a table as it is: CSV/TSV (delimiter and encoding detected), Parquet and XLSX.

Every failure a user can cause becomes an :class:`InputError` whose one line names the file and what to do.
Nothing here interprets the values beyond reading them; column roles are decided in :mod:`roles`.
"""

from __future__ import annotations

import csv
import hashlib
import io
import re
import statistics
import sys
import zipfile
import zlib
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow.parquet as pq

from investigator.errors import InputError
from investigator.io.datasets import PARQUET_SUFFIXES, is_dataset, parquet_files
from investigator.io.numbers import DECIMALS, NumberColumn, read_numbers
from investigator.printable import printable

MIN_ROWS = 5
CSV_SUFFIXES = {".csv", ".txt", ".tsv", ".tab"}
EXCEL_SUFFIXES = {".xlsx", ".xlsm"}
# Tried in order when a file is not valid UTF-8. cp1252 is the usual spreadsheet export on Windows;
# latin-1 decodes any byte string, so it is the last resort and always says so in a notice.
FALLBACK_ENCODINGS = ("cp1252", "latin-1")
# What a damaged .xlsx raises, when opened or while its rows are read (parts are parsed lazily).
XLSX_ERRORS = (zipfile.BadZipFile, KeyError, OSError, ValueError, SyntaxError, EOFError, zlib.error)
# What files start with, to read a table by its content whatever its name says.
PARQUET_MAGIC, ZIP_MAGIC, OLE_MAGIC = b"PAR1", b"PK\x03\x04", b"\xd0\xcf\x11\xe0"
# A text table holds (almost) no control characters; random bytes read as latin-1 are a quarter of them.
CONTROL_SHARE = 0.02
_CONTROL = re.compile(r"[\x00-\x08\x0b\x0e-\x1f\x7f-\x9f]")
# Header search: at most this many title or blank rows above the header, judged against the rows below.
MAX_TITLE_ROWS = 10
# The csv module refuses fields over 128 KiB by default; pandas reads them, so the field-count check must too.
csv.field_size_limit(min(sys.maxsize, 2**31 - 1))


@dataclass
class Source:
    """Where the records came from; goes into the run record verbatim."""

    path: str | None
    format: str
    sha256: str | None = None
    encoding: str | None = None
    delimiter: str | None = None
    sheet: str | None = None
    decimal: str | None = None  # "," when numbers were read with a decimal comma
    header_row: int | None = None  # the file's row holding the column names, when it is not the first

    def as_dict(self) -> dict:
        return {k: v for k, v in self.__dict__.items() if v is not None}


@dataclass
class Table:
    """The raw records, as read, plus their keys.

    ``frame`` keeps the columns in file order with the values pandas read; ``keys`` holds one key per record:
    the ``--id`` column's value, or the 1-based data row when no key column is named.
    """

    frame: pd.DataFrame
    source: Source
    key_column: str | None = None
    notices: list[str] = field(default_factory=list)
    rows: np.ndarray | None = None  # 1-based data rows in the file, when this is a subset of it

    @property
    def name(self) -> str:
        return Path(self.source.path).name if self.source.path else "the data frame"

    @property
    def n_rows(self) -> int:
        return len(self.frame)

    @property
    def row_numbers(self) -> np.ndarray:
        """1-based data row of each record in the file it came from."""
        return np.arange(1, len(self.frame) + 1) if self.rows is None else self.rows

    def subset(self, mask: np.ndarray) -> Table:
        """The records where ``mask`` is true, remembering their rows in the file."""
        return Table(self.frame[mask].reset_index(drop=True), self.source, self.key_column,
                     list(self.notices), self.row_numbers[mask])

    @cached_property
    def keys(self) -> list:
        if self.key_column is None:
            return [int(r) for r in self.row_numbers]
        return [_plain(v) for v in self.frame[self.key_column].tolist()]


def _plain(value):
    """A key as a JSON-friendly Python value (numpy scalars to int/float/str)."""
    if hasattr(value, "item"):
        value = value.item()
    if isinstance(value, float) and value.is_integer():
        return int(value)
    return value


def load_table(data, *, sheet: str | None = None, id_column: str | None = None,
               min_rows: int = MIN_ROWS, decimal: str | None = None, header_row: int | None = None) -> Table:
    """Read ``data`` (a path or a pandas DataFrame) into a :class:`Table` and check it is scannable.

    ``decimal``: the decimal mark of numbers written as text ("." or ","; None: told from each column).
    ``header_row``: the 1-based row of a file that holds the column names (None: found, see docs/usage.md).
    """
    check_reading_options(decimal, header_row)
    if isinstance(data, pd.DataFrame):
        _check_header(list(map(str, data.columns)), "the data frame")
        frame = data.reset_index(drop=True)
        frame.columns = [str(c) for c in frame.columns]
        for col in [c for c in frame.columns if frame[c].dtype == "object"]:
            # Cells holding lists, dicts or other objects are read as their text, as a file would hold them.
            if frame[col].map(lambda v: isinstance(v, list | dict | set | tuple)).any():
                frame[col] = frame[col].map(lambda v: v if v is None or isinstance(v, float) else str(v))
        table = Table(frame=frame, source=Source(path=None, format="dataframe"))
        if header_row is not None:
            raise InputError("`header_row` only applies to files; a data frame has its column names",
                             parameters=("header_row",))
    else:
        if is_dataset(data):
            if header_row is not None:
                raise InputError(f"{data}: `header_row` only applies to CSV and .xlsx files",
                                 parameters=("header_row",))
            table = _read_dataset(data, sheet)
        else:
            table = _read_file(Path(data), sheet=sheet, id_column=id_column, decimal=decimal,
                               header_row=header_row)
    if table.source.delimiter is None:  # text files had theirs read in _read_text, with the cells as written
        _numbers_as_text(table, id_column, decimal)
    _check_rows(table, min_rows)
    if id_column is not None:
        _check_key(table, id_column)
        table.key_column = id_column
    return table


def _given_header(path: Path, header_row: int, available: int, what: str) -> int:
    """The 0-based position of the user's 1-based ``header_row``; a one-line error when the file (``what``
    says its unit, with {} for the count) has fewer rows."""
    if header_row > available:
        raise InputError(f"{path}: header_row={header_row}, but {what.format(available)}",
                         parameters=("header_row",))
    return header_row - 1


def check_reading_options(decimal: str | None, header_row: int | None) -> None:
    """``decimal`` and ``header_row`` as the loader takes them; a one-line error naming the parameter."""
    if decimal is not None and decimal not in DECIMALS:
        raise InputError(f"`decimal` must be '.' or ',', not '{decimal}'", parameters=("decimal",))
    if header_row is not None and (isinstance(header_row, bool) or not isinstance(header_row, int)
                                   or header_row < 1):
        raise InputError(f"`header_row` must be a row number from 1 up, not '{header_row}'",
                         parameters=("header_row",))


def _read_file(path: Path, *, sheet: str | None, id_column: str | None, decimal: str | None = None,
               header_row: int | None = None) -> Table:
    if not path.exists():
        raise InputError(f"{path}: no such file; check the path")
    if path.is_dir():
        raise InputError(f"{path}: is a folder; give a CSV, Parquet or XLSX file")
    if not path.is_file():
        raise InputError(f"{path}: is not a regular file (a pipe or a device?); give a CSV, Parquet or XLSX file")
    try:
        raw = path.read_bytes()
    except PermissionError:
        raise InputError(f"{path}: cannot read: permission denied; allow reading it (or copy it where you "
                         "can read it)") from None
    except OSError as exc:
        raise InputError(f"{path}: cannot read: {exc.strerror or type(exc).__name__}; check the file") from None
    if not raw.strip():
        raise InputError(f"{path}: the file is empty; it needs a header row and data rows")
    digest = hashlib.sha256(raw).hexdigest()
    suffix = path.suffix.lower()
    notices: list[str] = []
    kind = _content_kind(raw)
    if suffix not in PARQUET_SUFFIXES | EXCEL_SUFFIXES | {".xls"} and kind != "text":
        # A table named .csv that is not text: read it for what it is, or say plainly what it is.
        if kind == "parquet":
            notices.append(f"{path.name} is really a Parquet file (whatever its name says); it was read as Parquet")
            suffix = ".parquet"
        elif kind == "xlsx":
            notices.append(f"{path.name} is really an .xlsx workbook (whatever its name says); it was read as one")
            suffix = ".xlsx"
        elif kind == "zip":
            raise InputError(f"{path}: is not a text table: it is a zip archive; unpack it and give the table "
                             "inside")
        elif kind == "ole":
            raise InputError(f"{path}: is not a text table: it is an old .xls workbook or another Office file; "
                             "save it as .xlsx or CSV")
    if suffix in PARQUET_SUFFIXES:
        frame, source = _read_parquet(path), Source(str(path), "parquet", digest)
    elif suffix in EXCEL_SUFFIXES:
        frame, used_sheet, found, excel_notices = _read_excel(path, raw, sheet, header_row)
        source = Source(str(path), "xlsx", digest, sheet=used_sheet, header_row=found if found > 1 else None)
        notices += excel_notices
    elif suffix in {".xls"}:
        raise InputError(f"{path}: old .xls workbooks are not supported; save it as .xlsx or CSV")
    else:
        frame, source, notices = _read_text(path, raw, digest, id_column, decimal, header_row)
    if sheet is not None and source.format != "xlsx":
        raise InputError(f"{path}: `sheet` only applies to .xlsx files", parameters=("sheet",))
    if header_row is not None and source.format not in ("xlsx", "csv", "tsv"):
        raise InputError(f"{path}: `header_row` only applies to CSV and .xlsx files", parameters=("header_row",))
    frame.columns = [str(c) for c in frame.columns]
    return Table(frame=frame, source=source, notices=notices)


def _content_kind(raw: bytes) -> str:
    """What the bytes are, by their first bytes: parquet, xlsx, zip (another archive), ole (old Office) or text."""
    if raw.startswith(PARQUET_MAGIC):
        return "parquet"
    if raw.startswith(ZIP_MAGIC):
        try:
            with zipfile.ZipFile(io.BytesIO(raw)) as archive:
                return "xlsx" if "xl/workbook.xml" in archive.namelist() else "zip"
        except (zipfile.BadZipFile, OSError, EOFError):
            return "zip"
    if raw.startswith(OLE_MAGIC):
        return "ole"
    return "text"


def _decode(raw: bytes, path: Path) -> tuple[str, str, list[str]]:
    if raw.startswith(b"\xef\xbb\xbf"):
        try:
            return raw[3:].decode("utf-8", errors="strict"), "utf-8-sig", []
        except UnicodeDecodeError as exc:
            line = raw[: exc.start + 3].count(b"\n") + 1
            raise InputError(f"{path}: starts with a UTF-8 byte-order mark but is not valid UTF-8 (first bad "
                             f"byte on line {line}); re-save it as CSV in UTF-8") from None
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        try:
            return raw.decode("utf-16"), "utf-16", []
        except UnicodeDecodeError as exc:
            why = "an odd number of bytes" if len(raw) % 2 else "bytes that are not UTF-16"
            raise InputError(f"{path}: starts with a UTF-16 byte-order mark but has {why} (from byte "
                             f"{exc.start}): the file may be cut short; export it again as CSV in UTF-8") from None
    order = _utf16_order(raw)
    if order is not None:
        try:
            text = raw.decode(order)
        except UnicodeDecodeError:
            pass  # not UTF-16 after all: the NUL check below refuses it
        else:
            return text, order, [f"the file has no byte-order mark, but its bytes are UTF-16 text ({order}); it was "
                                 "read as such: re-save it as CSV in UTF-8 to be sure"]
    try:
        return raw.decode("utf-8"), "utf-8", []
    except UnicodeDecodeError as exc:
        first_bad = exc.start
    for enc in FALLBACK_ENCODINGS:
        try:
            text = raw.decode(enc)
        except UnicodeDecodeError:
            continue
        line = raw[:first_bad].count(b"\n") + 1
        return text, enc, [
            f"the file is not valid UTF-8 (first bad byte on line {line}); it was read as {enc}: "
            "check accented text, or re-save the file as UTF-8"
        ]
    raise AssertionError("latin-1 decodes every byte string")  # pragma: no cover


def _utf16_order(raw: bytes) -> str | None:
    """'utf-16-le' or 'utf-16-be' for UTF-16 text without a byte-order mark, told by its NUL bytes: text in a
    Latin script has a NUL as the high byte of nearly every character (and no NUL as the low byte)."""
    sample = raw[:8192]
    if len(raw) % 2 or len(sample) < 8:
        return None
    even, odd = sample[0::2], sample[1::2]
    if odd.count(0) >= 0.9 * len(odd) and even.count(0) == 0:
        return "utf-16-le"
    if even.count(0) >= 0.9 * len(even) and odd.count(0) == 0:
        return "utf-16-be"
    return None


def _sniff_delimiter(text: str, suffix: str) -> str:
    if suffix in {".tsv", ".tab"}:
        return "\t"
    sample = "\n".join(text.splitlines()[:50])
    try:
        return csv.Sniffer().sniff(sample, delimiters=",;\t|").delimiter
    except csv.Error:
        header = sample.splitlines()[0] if sample else ""
        counts = {d: header.count(d) for d in ",;\t|"}
        best = max(counts, key=lambda d: counts[d])
        return best if counts[best] else ","


def _check_text(path: Path, text: str) -> None:
    """Refuse bytes that are no text table, before anything is read from them as one."""
    if "\x00" in text:
        # No text table holds NUL; UTF-8 (and the latin-1 fallback) decode one without complaint, so without
        # this check a binary file or UTF-16 text without a byte-order mark fails later with a misleading reason.
        raise InputError(
            f"{path}: is not a text table: it holds NUL bytes (a binary file, or text saved as UTF-16 without "
            "a byte-order mark); export it as CSV in UTF-8"
        )
    sample = text[:65536].rstrip("\x1a")  # Ctrl-Z: the end-of-file mark of old DOS programs
    controls = len(_CONTROL.findall(sample))
    if controls >= 3 and controls > CONTROL_SHARE * len(sample):
        raise InputError(
            f"{path}: is not a text table: {controls / len(sample):.0%} of its characters are control "
            "characters (a binary or damaged file); export it as CSV in UTF-8"
        )


def _line_ends(text: str) -> str:
    """Text with old-Mac line ends (CR alone) turned into LF; CRLF and LF files are left as they are."""
    lone = len(re.findall(r"\r(?!\n)", text))
    if lone and lone > text.count("\n"):
        return re.sub(r"\r(?!\n)", "\n", text)
    return text


def _records(lines: list[str], delimiter: str, path: Path, start: int = 0):
    """(first line, fields) of each record from line ``start`` (0-based) on; quoted fields may span lines."""
    reader = csv.reader(iter(lines[start:]), delimiter=delimiter, skipinitialspace=True)
    line = start + 1
    try:
        for fields in reader:
            yield line, fields
            line = start + reader.line_num + 1
    except csv.Error as exc:
        raise InputError(f"{path}: cannot parse as delimited text near line {line} ({exc}); check quoting "
                         "and that every row has the same number of fields") from None


def _read_text(path: Path, raw: bytes, digest: str, id_column: str | None, decimal: str | None = None,
               header_row: int | None = None):
    text, encoding, notices = _decode(raw, path)
    _check_text(path, text)
    text = _line_ends(text)
    delimiter = _sniff_delimiter(text, path.suffix.lower())
    lines = list(io.StringIO(text))  # split on LF only, as the csv module reads
    if header_row is not None:
        start = _given_header(path, header_row, len(lines), "the file has {} lines")
    else:
        head = []
        for item in _records(lines, delimiter, path):
            head.append(item)
            if len(head) > MAX_TITLE_ROWS + 20:
                break
        found = find_header([fields for _, fields in head])
        start = head[found][0] - 1 if head else 0
        if found:
            notices.append(header_notice(start + 1, found))
    records = _records(lines, delimiter, path, start)
    header: list[str] = next((fields for _, fields in records if fields), [])
    _check_header(_name_blanks(header), str(path))
    notices += _check_field_counts(path, records, len(header))
    if looks_like_data(header):
        notices.append(DATA_AS_HEADER)
    body = io.StringIO("".join(lines[start:])) if start else io.StringIO(text)
    dtype = {id_column: str} if id_column is not None and id_column in header else None
    try:
        # index_col=False: a row with more fields than the header must never make the first column the index
        # (every column would shift by one); such rows were refused or their empty extras noted above.
        frame = pd.read_csv(body, sep=delimiter, dtype=dtype, skipinitialspace=True, index_col=False)
    except pd.errors.ParserError as exc:
        reason = str(exc).strip().splitlines()[-1]
        raise InputError(
            f"{path}: cannot parse as delimited text ({reason}); check quoting and that every row has "
            "the same number of fields"
        ) from None
    except pd.errors.EmptyDataError:
        raise InputError(f"{path}: the file is empty; it needs a header row and data rows") from None
    frame.columns = [str(c) for c in frame.columns]
    raw_text = None
    seen = _text_numbers(frame, id_column) if decimal is None else {}
    if decimal == "," or (decimal is None and _shows_decimal_comma(seen)):
        # Numbers pandas read with a decimal point ('1.234') may be thousands in a decimal-comma file: read
        # every cell as written, and let each column's numbers decide.
        body.seek(0)
        raw_text = pd.read_csv(body, sep=delimiter, dtype=str, skipinitialspace=True, index_col=False)
        raw_text.columns = frame.columns
    source = Source(str(path), "tsv" if delimiter == "\t" else "csv", digest, encoding, delimiter,
                    header_row=start + 1 if start else None)
    table = Table(frame, source, notices=notices)
    _numbers_as_text(table, id_column, decimal, raw_text, seen if raw_text is None else None)
    return table.frame, source, notices


def _check_field_counts(path: Path, records, width: int) -> list[str]:
    """Refuse a record with more fields than the header (pandas would shift the columns or fail later);
    extra fields that are all empty (a trailing delimiter on the data lines only) are noted and ignored."""
    empty_extra: list[int] = []
    for line, fields in records:
        if len(fields) > width:
            if any(f.strip() for f in fields[width:]):
                raise InputError(
                    f"{path}: line {line} has {len(fields)} fields but the header has {width}; check quoting "
                    "(a value holding the delimiter needs quotes) and that every row has the same number of fields"
                )
            empty_extra.append(line)
    if not empty_extra:
        return []
    return [f"{len(empty_extra)} lines (first: line {empty_extra[0]}) end with empty fields beyond the header's "
            f"{width} columns (a trailing delimiter); the empty fields were ignored"]


def _text_numbers(frame: pd.DataFrame, id_column: str | None) -> dict[str, NumberColumn | None]:
    """Each text column (but the key) read as numbers, the decimal mark told from its cells."""
    return {name: read_numbers(frame[name]) for name in frame.columns if name != id_column and _is_text(frame[name])}


def _shows_decimal_comma(columns: dict[str, NumberColumn | None]) -> bool:
    """Whether a text column's numbers clearly use a decimal comma and none clearly uses a decimal point."""
    marks = {c.decimal for c in columns.values() if c is not None and not c.ambiguous and c.reason is None}
    return marks == {","}


def _numbers_as_text(table: Table, id_column: str | None, decimal: str | None,
                     raw_text: pd.DataFrame | None = None, seen: dict[str, NumberColumn | None] | None = None) -> None:
    """Columns of numbers written as text ($1,234.50, 1.234,56, placeholders, spreadsheet errors) read as numbers,
    with a notice per column; ``raw_text``: the cells as written, when numbers pandas read may need reading again;
    ``seen``: columns already read so (with the decimal mark told from the cells and a decimal point preferred)."""
    frame = table.frame
    used_comma = False
    prefer = decimal or ("," if raw_text is not None else ".")
    for name in frame.columns:
        if name == id_column or pd.api.types.is_bool_dtype(frame[name]):
            continue
        is_text = _is_text(frame[name])
        if raw_text is None and not is_text:
            continue
        source = raw_text[name] if raw_text is not None else frame[name]
        column = seen[name] if seen is not None and name in seen else read_numbers(source, decimal, prefer)
        if column is None:
            continue
        if column.numbers is not None:
            before = frame[name]
            if not is_text and np.allclose(before.to_numpy(dtype=float), column.numbers.to_numpy(), equal_nan=True):
                continue  # plain numbers, read alike either way
            frame[name] = column.numbers
            used_comma |= column.decimal == ","
        elif not is_text:
            continue  # numbers pandas read, that the decimal comma does not fit: left as read
        notice = column.notice(name)
        if notice:
            table.notices.append(notice)
    if used_comma:
        table.source.decimal = ","


def _is_text(values: pd.Series) -> bool:
    return values.dtype == object or pd.api.types.is_string_dtype(values)


def find_header(rows: list[list]) -> int:
    """The index of the header among the first rows of a sheet or file: title rows (one or two filled cells,
    as a merged title is) and blank rows above it are skipped, judged against the rows below them."""
    filled = [sum(1 for v in row if v is not None and str(v).strip()) for row in rows]
    for i in range(min(MAX_TITLE_ROWS, len(rows) - 1)):
        below = filled[i + 1: i + 21]
        typical = statistics.median(below) if below else 0
        if typical < 3 or filled[i] > max(1, typical // 4):
            # A row of numbers is no header: the first row was (a header with mostly blank names), not a title.
            return i if i == 0 or not looks_like_data(rows[i]) else 0
    return 0


def header_notice(row: int, skipped: int) -> str:
    return (f"header found on row {row}: the {skipped} row{'s' if skipped > 1 else ''} above it look like a title "
            "or are blank and were skipped (give --header-row N to choose the row)")


DATA_AS_HEADER = ("the first row looks like data, not column names (all its cells are numbers); it was read as the "
                  "header: if the file has none, add a header row (or give --header-row N)")


def looks_like_data(header: list) -> bool:
    """A header whose cells are all numbers (two or more of them) is most likely the first data row."""
    cells = [str(h).strip() for h in header if h is not None and str(h).strip()]
    if len(cells) < 2:
        return False
    try:
        [float(c) for c in cells]
    except ValueError:
        return False
    return True


def _read_dataset(data, sheet: str | None) -> Table:
    """A Parquet dataset (folder or glob) in memory: its files in natural order, one table."""
    if sheet is not None:
        raise InputError(f"{data}: `sheet` only applies to .xlsx files", parameters=("sheet",))
    files = parquet_files(data)
    frames: list[pd.DataFrame] = []
    digest = hashlib.sha256()
    for path in files:
        frame = _read_parquet(path)
        if frames and list(frame.columns) != list(frames[0].columns):
            raise InputError(f"{path}: its columns differ from those of {files[0].name}; every file of a "
                             "dataset needs the same columns in the same order")
        frames.append(frame)
        digest.update(hashlib.sha256(path.read_bytes()).digest())
    frame = pd.concat(frames, ignore_index=True) if len(frames) > 1 else frames[0]
    frame.columns = [str(c) for c in frame.columns]
    return Table(frame=frame, source=Source(str(data), "parquet dataset", digest.hexdigest()))


def read_parquet_schema(path: Path) -> list[str]:
    """Column names of a Parquet file, checked as a header is; a clear error for a damaged file."""
    try:
        names = [str(c) for c in pq.read_schema(path).names]
    except Exception as exc:  # pyarrow raises several types for damaged files
        reason = str(exc).strip().splitlines()[0][:120] if str(exc).strip() else type(exc).__name__
        raise InputError(
            f"{path}: not a readable Parquet file ({reason}); check the file is complete or re-export it"
        ) from None
    _check_header(names, str(path))
    return names


def _read_parquet(path: Path) -> pd.DataFrame:
    try:
        # Names first: pyarrow cannot read a file whose columns share a name, and would not say so plainly.
        _check_header([str(c) for c in pq.read_schema(path).names], str(path))
        frame = pq.read_table(path).to_pandas()
    except InputError:
        raise
    except Exception as exc:  # pyarrow raises several types for damaged files
        reason = str(exc).strip().splitlines()[0][:120] if str(exc).strip() else type(exc).__name__
        raise InputError(
            f"{path}: not a readable Parquet file ({reason}); check the file is complete or re-export it"
        ) from None
    _check_header([str(c) for c in frame.columns], str(path))
    return frame


def _read_excel(path: Path, raw: bytes, sheet: str | None,
                header_row: int | None = None) -> tuple[pd.DataFrame, str, int, list[str]]:
    """The sheet's records, the sheet's name, the 1-based row of its header and the notices."""
    # Deferred: openpyxl (with Pillow) adds 0.1 s to reading any table (`python -X importtime` after pandas, on
    # this machine), and only .xlsx files need it.
    import openpyxl

    notices: list[str] = []
    try:
        # From the bytes already read: openpyxl judges a file by its name, and a workbook may be named .csv.
        book = openpyxl.load_workbook(io.BytesIO(raw), read_only=True, data_only=True)
    except XLSX_ERRORS as exc:
        raise _unreadable_xlsx(path, exc) from None
    try:
        names = book.sheetnames
        if sheet is None:
            sheet = names[0]
        elif sheet not in names:
            raise InputError(f"{path}: no sheet named '{sheet}'; sheets are: {', '.join(names)}")
        # min_row=1: rows are counted from the sheet's first row, as the spreadsheet shows them.
        rows = list(book[sheet].iter_rows(min_row=1, values_only=True))
        if not any(any(v is not None for v in r) for r in rows):
            raise InputError(f"{path}: sheet '{sheet}' is empty; it needs a header row and data rows")
        if header_row is not None:
            at = _given_header(path, header_row, len(rows), f"sheet '{sheet}' has {{}} rows")
        else:
            at = find_header([list(r) for r in rows[: MAX_TITLE_ROWS + 21]])
            if at:
                notices.append(header_notice(at + 1, at))
        header = ["" if h is None else str(h) for h in rows[at]]
        while header and header[-1] == "":
            header.pop()
        if looks_like_data(header):
            notices.append(DATA_AS_HEADER)
        header = _name_blanks(header)
        _check_header(header, f"{path} (sheet '{sheet}')")
        records = [list(r[: len(header)]) for r in rows[at + 1:] if any(v is not None for v in r)]
    except InputError:
        raise
    except XLSX_ERRORS as exc:
        raise _unreadable_xlsx(path, exc) from None
    finally:
        book.close()
    frame = pd.DataFrame(records, columns=header)
    # Cells read by openpyxl are Python objects; let pandas settle each column's type as it would for CSV.
    frame = frame.infer_objects()
    blank = [c for c in frame.columns if not c.startswith("Unnamed: ") and frame[c].isna().all()]
    if blank:
        notices += _unsaved_formulas(path, raw, sheet, at, [header.index(c) for c in blank], header)
    return frame, sheet, at + 1, notices


def _unsaved_formulas(path: Path, raw: bytes, sheet: str, at: int, positions: list[int],
                      header: list[str]) -> list[str]:
    """Notices for the empty columns whose cells are formulas with no saved value: a workbook written by a
    program and never opened in a spreadsheet has the formulas but not their results."""
    import openpyxl  # deferred as in _read_excel (already imported there: no further cost)

    book = openpyxl.load_workbook(io.BytesIO(raw), read_only=True, data_only=False)
    try:
        formulas = set()
        for row in book[sheet].iter_rows(min_row=at + 2, max_row=at + 201, values_only=True):
            for j in positions:
                if j < len(row) and isinstance(row[j], str) and row[j].startswith("="):
                    formulas.add(j)
    finally:
        book.close()
    return [f"column '{_show(header[j])}': formulas without saved values (the file was written by a program and "
            "never opened in a spreadsheet), so it is empty here: open and save the file in a spreadsheet "
            "program, or export CSV" for j in sorted(formulas)]


def _unreadable_xlsx(path: Path, exc: Exception) -> InputError:
    return InputError(
        f"{path}: not a readable .xlsx workbook ({type(exc).__name__}); check the file is complete "
        "or re-save it from the spreadsheet program"
    )


def _name_blanks(header: list[str]) -> list[str]:
    """Blank header cells named as pandas names them in a CSV ('Unnamed: 3', counted from 0), so that
    trailing empty columns of a spreadsheet export are not taken for duplicate names."""
    return [h if h.strip() else f"Unnamed: {i}" for i, h in enumerate(header)]


def _check_header(header: list[str], where: str) -> None:
    seen: dict[str, int] = {}
    for position, name in enumerate(header, 1):
        key = name.strip()
        if key in seen:
            raise InputError(
                f"{where}: column name '{_show(key)}' appears twice (columns {seen[key]} and {position}); "
                "rename one so every column has its own name"
            )
        seen[key] = position


def _check_rows(table: Table, min_rows: int = MIN_ROWS) -> None:
    n = len(table.frame)
    if table.frame.shape[1] == 0:
        raise InputError(f"{table.name}: no columns found; it needs a header row and data rows")
    if n == 0:
        raise InputError(f"{table.name}: has a header but no data rows; a scan needs at least {min_rows}")
    if n < min_rows:
        raise InputError(
            f"{table.name}: has only {n} data row{'s' if n != 1 else ''}; a scan needs at least {min_rows}"
        )


def _check_key(table: Table, column: str) -> None:
    frame = table.frame
    if column not in frame.columns:
        raise InputError(
            f"{table.name}: `id` column '{column}' not found; columns are: {name_list(frame.columns)}",
            parameters=("id",),
        )
    _check_key_values(frame[column], column, table.name)


def _check_key_values(values: pd.Series, column: str, name: str) -> None:
    """Every record has a key and no two share one (rows are 1-based positions of ``values``)."""
    values = values.reset_index(drop=True)
    missing = values.isna().to_numpy().nonzero()[0]
    if len(missing):
        raise InputError(
            f"{name}: `id` column '{column}' is empty in row {missing[0] + 1}; every record needs a "
            "key (fill it in, or leave `id` out to key records by row)", parameters=("id",)
        )
    dup = values.duplicated(keep=False).to_numpy().nonzero()[0]
    if len(dup):
        first = values.iloc[dup[0]]
        rows = [str(i + 1) for i in dup if values.iloc[i] == first][:3]
        raise InputError(
            f"{name}: `id` column '{column}' has the value '{_show(first)}' in rows {', '.join(rows)}; "
            "a key must be unique (choose another column, or leave `id` out to key records by row)",
            parameters=("id",),
        )


def _show(name) -> str:
    """A name or value fit for a one-line message: line breaks (common in spreadsheet headers) and terminal
    control codes escaped, so a message is one line and a file cannot drive the terminal that shows it."""
    return printable(name)


def name_list(names, limit: int = 12) -> str:
    """Column names for a one-line message: comma-separated, line breaks escaped, at most ``limit`` shown."""
    names = [_show(n) for n in names]
    shown = ", ".join(names[:limit])
    return shown + (f", ... ({len(names)} in all)" if len(names) > limit else "")
