"""Numbers as people type them: currency signs, thousands separators, decimal commas, placeholders, errors.

A column of cells such as ``$1,234.50``, ``-``, ``#DIV/0!`` or ``1.234,56`` is text to pandas; here it is read
as numbers, the placeholders and spreadsheet error values as missing, and what was done is counted for a
notice. A column is converted only when nearly every cell it holds is a number, a placeholder or an error
value, so dates, codes and ordinary text stay as they are.

What a cell may hold (spaces around the parts are allowed):

- a sign (``-``, ``+``, the Unicode minus), or accounting parentheses ``(1,234.00)`` for a negative;
- a currency sign before or after (``$ € £ ¥ ₹ ₩ ₽ ₣ ₺ ¢``) or a common three-letter code (``12.30 EUR``);
- digits with thousands separators in groups of three (``,`` ``'`` or a space with a decimal point; ``.``
  ``'`` or a space with a decimal comma), a decimal part, an exponent (plain digits only);
- a trailing ``%``: the value is kept as written (``12%`` is 12, in percent points).

Whole numbers with a leading zero (``00123``) in a column without any other number format are codes, not
numbers, and the column is left as text.
"""

from __future__ import annotations

import re
from collections import Counter
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

# A column is read as numbers when at least this share of its cells that are neither empty, placeholders
# nor error values parse; the same share the column roles use for numbers written as text.
NUMBER_SHARE = 0.95
# A column "looks numeric" (and gets a notice when it is not converted) from this share on.
LOOKS_NUMERIC = 0.5
DECIMALS = (".", ",")

PLACEHOLDERS = frozenset({
    "", "-", "--", "---", "—", "–", "−", "n/a", "na", "n.a.", "n.a", "nan", "null", "none", "nil", "?", ".", "..",
    "...",
})
# Error values a spreadsheet shows in a cell whose formula failed (#N/A also means "not available").
SPREADSHEET_ERRORS = frozenset({
    "#DIV/0!", "#N/A", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#NULL!", "#SPILL!", "#CALC!", "#GETTING_DATA",
    "#N/A N/A", "#FIELD!", "#BLOCKED!", "#CONNECT!", "#BUSY!", "#UNKNOWN!",
})
CURRENCY_SIGNS = "$€£¥₹₩₽₣₺¢"
CURRENCY_CODES = frozenset({
    "USD", "EUR", "GBP", "JPY", "CHF", "CAD", "AUD", "NZD", "SEK", "NOK", "DKK", "PLN", "CZK", "HUF", "CNY",
    "INR", "BRL", "MXN", "ZAR", "RUB", "TRY", "KRW", "SGD", "HKD", "ISK", "RON", "BGN",
})
_CODE_BEFORE = re.compile(r"^([A-Z]{3})\s*(?=[-+(\d.,])")
_CODE_AFTER = re.compile(r"(?<=[\d.,)%])\s*([A-Z]{3})$")
# Thousands groups must use one separator throughout the number (the backreference).
_DOT_BODY = re.compile(
    r"\d{1,3}(?P<s>[,' ])\d{3}(?:(?P=s)\d{3})*(?:\.\d+)?|\d+\.?\d*(?:[eE][-+]?\d+)?|\.\d+(?:[eE][-+]?\d+)?"
)
_COMMA_BODY = re.compile(r"\d{1,3}(?P<s>[.' ])\d{3}(?:(?P=s)\d{3})*(?:,\d+)?|\d+(?:,\d+)?|,\d+")
_LEADING_ZERO = re.compile(r"0\d+")
_SPACES = str.maketrans({"\u00a0": " ", "\u202f": " ", "\u2009": " ", "’": "'", "−": "-"})


@dataclass(frozen=True)
class Cell:
    """One cell read both ways: its value with a decimal point and with a decimal comma (None: does not fit),
    what formatting it carried (currency, percent, parentheses) and whether each reading has thousands groups."""

    dot: float | None
    comma: float | None
    marks: frozenset[str]
    currency: str | None
    plain_integer: bool  # digits only, no formatting: what a leading zero makes a code
    dot_grouped: bool = False
    comma_grouped: bool = False

    def value(self, decimal: str) -> float | None:
        return self.dot if decimal == "." else self.comma

    def formatting(self, decimal: str) -> frozenset[str]:
        grouped = self.dot_grouped if decimal == "." else self.comma_grouped
        return self.marks | {"thousands"} if grouped else self.marks


def read_cell(text: str) -> Cell | None:
    """The number in ``text`` (a cell that is not a placeholder), or None when it holds no number."""
    s = text.translate(_SPACES).strip()
    marks: set[str] = set()
    negative = False
    if s.startswith("(") and s.endswith(")"):
        negative, s = True, s[1:-1].strip()
        marks.add("parentheses")
    currency: str | None = None
    for _ in range(2):  # a sign and a currency in either order: -$12, $-12
        if s[:1] in ("-", "+"):
            negative ^= s[0] == "-"
            s = s[1:].strip()
        if s[:1] and s[0] in CURRENCY_SIGNS:
            currency, s = s[0], s[1:].strip()
        elif (code := _CODE_BEFORE.match(s)) and code[1] in CURRENCY_CODES:
            currency, s = code[1], s[code.end():]
    if s.endswith("%"):
        marks.add("percent")
        s = s[:-1].strip()
    if s[-1:] and s[-1] in CURRENCY_SIGNS:
        if currency not in (None, s[-1]):
            return None
        currency, s = s[-1], s[:-1].strip()
    elif (code := _CODE_AFTER.search(s)) and code[1] in CURRENCY_CODES:
        if currency not in (None, code[1]):
            return None
        currency, s = code[1], s[: code.start()]
    if s.endswith("%") and "percent" not in marks:
        marks.add("percent")
        s = s[:-1].strip()
    if not s or not s[0].isdigit() and s[0] not in ".,":
        return None
    if currency is not None:
        marks.add("currency")
    sign = -1.0 if negative else 1.0
    dot, dot_grouped = _body(s, _DOT_BODY, ".")
    comma, comma_grouped = _body(s, _COMMA_BODY, ",")
    if dot is None and comma is None:
        return None
    return Cell(None if dot is None else sign * dot, None if comma is None else sign * comma,
                frozenset(marks), currency, s.isdigit() and not marks, dot_grouped, comma_grouped)


def _body(s: str, pattern: re.Pattern[str], decimal: str) -> tuple[float | None, bool]:
    """The value of the digits ``s`` with ``decimal`` as the decimal mark, and whether it has thousands groups."""
    m = pattern.fullmatch(s)
    if m is None:
        return None, False
    sep = m.group("s")
    digits = s.replace(sep, "") if sep else s
    if decimal == ",":
        digits = digits.replace(",", ".")
    return float(digits), sep is not None


@dataclass
class NumberColumn:
    """What reading one column as numbers found. ``numbers`` is the converted column (float64, index as the
    input) or None when the column stays as it was; ``notice`` says what was done or why not."""

    numbers: pd.Series | None
    decimal: str | None  # the decimal mark used, or the one the cells clearly show
    ambiguous: bool = False  # every number fits both readings and they differ somewhere
    formatted: int = 0
    marks: Counter = field(default_factory=Counter)
    placeholders: Counter = field(default_factory=Counter)
    errors: Counter = field(default_factory=Counter)
    not_numbers: int = 0
    example: tuple[str, int] | None = None  # a cell that is not a number, and its 1-based data row
    reason: str | None = None  # why a column that looks numeric was not converted

    def notice(self, name: str) -> str | None:
        """One line for the user, or None when there is nothing worth saying (plain numbers)."""
        if self.numbers is None:
            return None if self.reason is None else f"{name}: looks numeric but was left as text: {self.reason}"
        parts = []
        if self.formatted:
            kinds = [k for k in ("currency", "thousands", "percent", "parentheses") if self.marks[k]]
            words = {"currency": "currency", "thousands": "thousands", "percent": "percent",
                     "parentheses": "(negative)"}
            parts.append(f"{self.formatted} {'/'.join(words[k] for k in kinds)}-formatted value"
                         + ("s" if self.formatted != 1 else ""))
        missing = []
        if self.placeholders:
            missing.append(f"{sum(self.placeholders.values())} placeholders ({_examples(self.placeholders)})")
        if self.errors:
            missing.append(f"{sum(self.errors.values())} spreadsheet errors ({_examples(self.errors)})")
        if self.not_numbers and self.example:
            missing.append(f"{self.not_numbers} cells that are not numbers (e.g. '{_show(self.example[0])}' "
                           f"in row {self.example[1]})")
        if missing:
            parts.append(" and ".join([", ".join(missing[:-1]), missing[-1]] if len(missing) > 1 else missing)
                         + " read as missing")
        comma = " with a decimal comma ('1.234,5' is 1234.5)" if self.decimal == "," else ""
        if not parts and not comma:
            return None
        text = f"{name}: read as numbers{comma}" + (": " + ", ".join(parts) if parts else "")
        if self.ambiguous:
            other = "." if self.decimal == "," else ","
            text += (f"; every value can be read with either decimal mark, '{self.decimal}' was used: give "
                     f"--decimal {other} if that is wrong")
        return text


def _examples(counts: Counter, limit: int = 3) -> str:
    return ", ".join(f"'{_show(k)}'" if k else "blank" for k, _ in counts.most_common(limit))


def _show(text: object) -> str:
    return str(text).replace("\r", "\\r").replace("\n", "\\n")[:40]


def read_numbers(values: pd.Series, decimal: str | None = None, prefer: str = ".") -> NumberColumn | None:
    """Read a column of text (or of text and numbers, as a spreadsheet gives them) as numbers.

    ``decimal``: the decimal mark, or None to tell it from the cells: a column whose numbers only fit one
    reading uses that one; when every number fits both and they differ (only ``1,234`` or only ``1.234``),
    ``prefer`` decides and the result is marked ambiguous. Rows in notices are positions in ``values``, from 1.
    Returns None when the column does not look numeric at all.
    """
    present = values[values.notna()]
    if len(present) == 0:
        return None
    distinct = pd.unique(present.to_numpy(dtype=object))
    # A quick look at the first distinct values keeps long text columns (names, notes) cheap.
    head = [_classify(v) for v in distinct[:200]]
    if sum(isinstance(c, Cell) for c in head) < 0.3 * sum(c not in ("p", "e") for c in head):
        return None
    cells: dict[object, Cell | str | None] = dict(zip(distinct[:200], head, strict=True))
    for value in distinct[200:]:
        cells[value] = _classify(value)  # each distinct value read once: "p" placeholder, "e" error
    kinds = [cells[v] for v in present.to_numpy(dtype=object)]
    numbers = [c for c in kinds if isinstance(c, Cell)]
    meaningful = sum(1 for c in kinds if c not in ("p", "e"))
    if not numbers or len(numbers) < LOOKS_NUMERIC * meaningful:
        return None
    column = NumberColumn(None, decimal)
    if all(c.plain_integer for c in numbers) and any(_LEADING_ZERO.fullmatch(str(v).strip())
                                                      for v, c in cells.items() if isinstance(c, Cell)):
        return None  # codes such as 00123: identifiers, not amounts (the test of leading_zero_codes, on the cells)
    currencies = {c.currency for c in numbers if c.currency}
    if len(currencies) > 1:
        column.reason = (f"it holds amounts in more than one currency ({', '.join(sorted(currencies))}); "
                         "give each currency its own column")
        return column
    mark = decimal
    if mark is None:
        dot_only = sum(1 for c in numbers if c.comma is None)
        comma_only = sum(1 for c in numbers if c.dot is None)
        if dot_only and comma_only:
            d = next(v for v, c in cells.items() if isinstance(c, Cell) and c.comma is None)
            k = next(v for v, c in cells.items() if isinstance(c, Cell) and c.dot is None)
            column.reason = (f"it mixes decimal points and decimal commas ('{_show(d)}', '{_show(k)}'); give "
                             "--decimal . or --decimal , to say which mark the file uses")
            return column
        mark = "," if comma_only else "." if dot_only else prefer
        column.ambiguous = not dot_only and not comma_only and any(c.dot != c.comma for c in numbers)
    column.decimal = mark
    out = np.full(len(values), np.nan)
    positions = np.flatnonzero(values.notna().to_numpy())
    bad: list[int] = []
    for pos, value, cell in zip(positions, present.to_numpy(dtype=object), kinds, strict=True):
        if cell == "p":
            column.placeholders[_placeholder_name(value)] += 1
        elif cell == "e":
            column.errors[str(value).strip().upper()] += 1
        elif isinstance(cell, Cell) and (number := cell.value(mark)) is not None:
            out[pos] = number
            if marks := cell.formatting(mark):
                column.formatted += 1
                column.marks.update(marks)
        else:
            bad.append(int(pos))
    column.not_numbers = len(bad)
    if bad:
        column.example = (str(values.iloc[bad[0]]), int(bad[0]) + 1)
    if len(bad) > (1 - NUMBER_SHARE) * meaningful:
        column.reason = (f"{len(bad)} of {meaningful} cells are not numbers{_with_mark(decimal)} (e.g. "
                         f"'{_show(column.example[0]) if column.example else ''}' in row "
                         f"{column.example[1] if column.example else 0}); correct those cells to use the column")
        return column
    column.numbers = pd.Series(out, index=values.index, name=values.name)
    return column


def leading_zero_codes(values: pd.Series) -> bool:
    """Whether the number-like cells of ``values`` are all digits only and some start with a zero (``00123``):
    codes such as article numbers or postcodes, which must not be read as amounts."""
    text = values.dropna().astype(str).str.strip()
    number_like = text[text.str.fullmatch(r"[-+(]?[\d.,' ]*\d[\d.,' )%]*")]
    digits = number_like.str.fullmatch(r"\d+")
    return bool(len(number_like)) and bool(digits.all()) and bool(number_like.str.match(r"0\d").any())


def _with_mark(decimal: str | None) -> str:
    return "" if decimal is None else f" with the decimal mark '{decimal}'"


def _placeholder_name(value: object) -> str:
    return str(value).translate(_SPACES).strip()


def _classify(value: object) -> Cell | str | None:
    if isinstance(value, bool | np.bool_):
        return None
    if isinstance(value, int | float | np.integer | np.floating):
        number = float(value)
        return Cell(number, number, frozenset(), None, False)
    text = str(value)
    if text.strip().upper() in SPREADSHEET_ERRORS:
        return "e"
    if text.translate(_SPACES).strip().lower() in PLACEHOLDERS:
        return "p"
    return read_cell(text)
