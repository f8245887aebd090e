"""Loading a table as it is: CSV/TSV (delimiter and encoding detected), Parquet and XLSX.

Every failure a user can cause becomes an :class:`InputError` whose one line names the file and what to do.
Nothing here interprets the values beyond reading them; column roles are decided in :mod:`roles`.
"""

from __future__ import annotations

import csv
import hashlib
import io
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

MIN_ROWS = 5
CSV_SUFFIXES = {".csv", ".txt", ".tsv", ".tab"}
EXCEL_SUFFIXES = {".xlsx", ".xlsm"}
# Tried in order when a file is not valid UTF-8. cp1252 is the usual spreadsheet export on Windows;
# latin-1 decodes any byte string, so it is the last resort and always says so in a notice.
FALLBACK_ENCODINGS = ("cp1252", "latin-1")
# What a damaged .xlsx raises, when opened or while its rows are read (parts are parsed lazily).
XLSX_ERRORS = (zipfile.BadZipFile, KeyError, OSError, ValueError, SyntaxError, EOFError, zlib.error)


@dataclass
class Source:
    """Where the records came from; goes into the run record verbatim."""

    path: str | None
    format: str
    sha256: str | None = None
    encoding: str | None = None
    delimiter: str | None = None
    sheet: str | None = None

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
               min_rows: int = MIN_ROWS) -> Table:
    """Read ``data`` (a path or a pandas DataFrame) into a :class:`Table` and check it is scannable."""
    if isinstance(data, pd.DataFrame):
        _check_header(list(map(str, data.columns)), "the data frame")
        frame = data.reset_index(drop=True)
        frame.columns = [str(c) for c in frame.columns]
        for col in [c for c in frame.columns if frame[c].dtype == "object"]:
            # Cells holding lists, dicts or other objects are read as their text, as a file would hold them.
            if frame[col].map(lambda v: isinstance(v, list | dict | set | tuple)).any():
                frame[col] = frame[col].map(lambda v: v if v is None or isinstance(v, float) else str(v))
        table = Table(frame=frame, source=Source(path=None, format="dataframe"))
    else:
        if is_dataset(data):
            table = _read_dataset(data, sheet)
        else:
            table = _read_file(Path(data), sheet=sheet, id_column=id_column)
    _check_rows(table, min_rows)
    if id_column is not None:
        _check_key(table, id_column)
        table.key_column = id_column
    return table


def _read_file(path: Path, *, sheet: str | None, id_column: str | None) -> Table:
    if not path.exists():
        raise InputError(f"{path}: no such file; check the path")
    if path.is_dir():
        raise InputError(f"{path}: is a folder; give a CSV, Parquet or XLSX file")
    raw = path.read_bytes()
    if not raw.strip():
        raise InputError(f"{path}: the file is empty; it needs a header row and data rows")
    digest = hashlib.sha256(raw).hexdigest()
    suffix = path.suffix.lower()
    if suffix in PARQUET_SUFFIXES:
        frame, source = _read_parquet(path), Source(str(path), "parquet", digest)
        notices: list[str] = []
    elif suffix in EXCEL_SUFFIXES:
        frame, used_sheet = _read_excel(path, sheet)
        source, notices = Source(str(path), "xlsx", digest, sheet=used_sheet), []
    elif suffix in {".xls"}:
        raise InputError(f"{path}: old .xls workbooks are not supported; save it as .xlsx or CSV")
    else:
        frame, source, notices = _read_text(path, raw, digest, id_column)
    if sheet is not None and source.format != "xlsx":
        raise InputError(f"{path}: `sheet` only applies to .xlsx files", parameters=("sheet",))
    frame.columns = [str(c) for c in frame.columns]
    return Table(frame=frame, source=source, notices=notices)


def _decode(raw: bytes) -> tuple[str, str, list[str]]:
    if raw.startswith(b"\xef\xbb\xbf"):
        return raw[3:].decode("utf-8", errors="strict"), "utf-8-sig", []
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        return raw.decode("utf-16"), "utf-16", []
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


def _read_text(path: Path, raw: bytes, digest: str, id_column: str | None):
    text, encoding, notices = _decode(raw)
    if "\x00" in text:
        # No text table holds NUL; UTF-8 (and the latin-1 fallback) decode one without complaint, so without
        # this check a binary file or UTF-16 text without a byte-order mark fails later with a misleading reason.
        raise InputError(
            f"{path}: is not a text table: it holds NUL bytes (a binary file, or text saved as UTF-16 without "
            "a byte-order mark); export it as CSV in UTF-8"
        )
    delimiter = _sniff_delimiter(text, path.suffix.lower())
    header = next(csv.reader(io.StringIO(text), delimiter=delimiter), [])
    _check_header(_name_blanks(header), str(path))
    dtype = {id_column: str} if id_column is not None and id_column in header else None
    try:
        frame = pd.read_csv(io.StringIO(text), sep=delimiter, dtype=dtype, skipinitialspace=True)
    except pd.errors.ParserError as exc:
        reason = str(exc).strip().splitlines()[-1]
        raise InputError(
            f"{path}: cannot parse as delimited text ({reason}); check quoting and that every row has "
            "the same number of fields"
        ) from None
    except pd.errors.EmptyDataError:
        raise InputError(f"{path}: the file is empty; it needs a header row and data rows") from None
    source = Source(str(path), "tsv" if delimiter == "\t" else "csv", digest, encoding, delimiter)
    return frame, source, notices


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


def _read_excel(path: Path, sheet: str | None) -> tuple[pd.DataFrame, str]:
    # Deferred: openpyxl (with Pillow) adds 0.1 s to reading any table (`python -X importtime` after pandas, on
    # this machine), and only .xlsx files need it.
    import openpyxl

    try:
        book = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except XLSX_ERRORS as exc:
        raise _unreadable_xlsx(path, exc) from None
    try:
        names = book.sheetnames
        if sheet is None:
            sheet = names[0]
        elif sheet not in names:
            raise InputError(f"{path}: no sheet named '{sheet}'; sheets are: {', '.join(names)}")
        rows = book[sheet].iter_rows(values_only=True)
        header = next(rows, None)
        if header is None:
            raise InputError(f"{path}: sheet '{sheet}' is empty; it needs a header row and data rows")
        header = ["" if h is None else str(h) for h in header]
        while header and header[-1] == "":
            header.pop()
        header = _name_blanks(header)
        _check_header(header, f"{path} (sheet '{sheet}')")
        records = [list(r[: len(header)]) for r in rows if any(v is not None for v in r)]
    except InputError:
        raise
    except XLSX_ERRORS as exc:
        raise _unreadable_xlsx(path, exc) from None
    finally:
        book.close()
    frame = pd.DataFrame(records, columns=header)
    # Cells read by openpyxl are Python objects; let pandas settle each column's type as it would for CSV.
    frame = frame.infer_objects()
    return frame, sheet


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
    """A name or value fit for a one-line message: line breaks (common in spreadsheet headers) escaped."""
    return str(name).replace("\r", "\\r").replace("\n", "\\n")


def name_list(names, limit: int = 12) -> str:
    """Column names for a one-line message: comma-separated, line breaks escaped, at most ``limit`` shown."""
    names = [_show(n) for n in names]
    shown = ", ".join(names[:limit])
    return shown + (f", ... ({len(names)} in all)" if len(names) > limit else "")
