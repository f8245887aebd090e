"""A filter on the records written as an SQL WHERE condition: ``amount > 5000 AND vendor = 'Q17'``.

The condition is the WHERE clause of the SQL standard (ISO/IEC 9075), the subset a reviewer needs:

- comparisons ``=`` (or ``==``), ``<>`` (or ``!=``), ``<``, ``<=``, ``>``, ``>=`` between a column and a value
  or two columns; ``AND``, ``OR``, ``NOT`` and parentheses;
- ``x [NOT] IN (v1, v2, ...)``, ``x [NOT] BETWEEN a AND b``, ``x IS [NOT] NULL``,
  ``x [NOT] LIKE 'pattern' [ESCAPE 'c']`` (``%`` any run of characters, ``_`` one character);
- values: numbers (``5000``, ``-12.5``, ``1e3``), text in single quotes (``'O''Brien'``: a quote is doubled),
  ``NULL``, ``TRUE`` and ``FALSE`` (1 and 0);
- columns by name, bare (``amount``, ``input.rank``: letters, digits, ``_`` and dots) or in double quotes for
  any other name (``"unit price"``, ``"2024"``); a bare name that matches no column exactly may match one
  ignoring case, as SQL names do.

It follows SQL's three-valued logic, as SQLite evaluates it (the reference the tests compare with): a
comparison with a missing value (NULL) is neither true nor false, ``NOT`` of it neither, ``AND`` is false when
either side is, ``OR`` true when either side is, and only records for which the whole condition is true pass.
Types as SQLite's column affinity treats them: a number column compared with text that reads as a number
compares the number (``amount > '5000'``); a text column compared with a number compares text
(``vendor = 17`` is ``vendor = '17'``); text compares by character code (case matters, as SQLite's default
collation). ``LIKE`` ignores case, for every letter (SQLite: for A-Z only), and matches a number by its text
(``17`` for a whole number, ``12.5``: up to 15 significant digits, as SQLite writes them). Two differences
from SQLite, both to say plainly what is wrong instead of returning nothing: a number column against text that
is no number, and columns of different kinds, are errors. Date columns (read as dates) compare with a date
written as text (``posted > '2025-06-30'``), and ``LIKE`` matches their ISO text (``2025-06-30``).

The text is read by a tokenizer and a recursive-descent parser of our own and evaluated as boolean masks over
a pandas DataFrame, column at a time; nothing is ever run as code. Every error is one line naming the position
(1-based character) and what was expected, or the unknown column and the columns there are.
"""

from __future__ import annotations

import difflib
import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from investigator.errors import InputError

KEYWORDS = frozenset({"AND", "OR", "NOT", "IN", "BETWEEN", "IS", "NULL", "LIKE", "ESCAPE", "TRUE", "FALSE"})
COMPARISONS = {"=": "=", "==": "=", "<>": "<>", "!=": "<>", "<": "<", "<=": "<=", ">": ">", ">=": ">="}
EXAMPLE = "amount > 5000 AND vendor = 'Q17'"
_NUMBER = re.compile(r"(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")
_BARE = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_NUMERIC_TEXT = re.compile(r"\s*[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?\s*")
MAX_COLUMNS_LISTED = 40
KIND_WORDS = {"number": "numbers", "text": "text", "date": "dates", "null": "NULL"}
KIND_ONE = {"number": "a number", "text": "text", "date": "a date", "null": "NULL"}


class WhereError(InputError):
    """A condition that cannot be read or applied; one line, with the position when there is one."""

    def __init__(self, message: str, position: int | None = None, brief: str | None = None) -> None:
        at = f"position {position}: " if position is not None else ""
        self.reason = at + message  # without the parameter's name
        self.brief = at + (brief or message)  # what a screen's filter line shows (no list of every column)
        super().__init__(f"`where`: {self.reason}", parameters=("where",))
        self.position = position


# -- tokens ---------------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Token:
    kind: str      # "number", "text", "name", "quoted" (a double-quoted name), "keyword", "op", "(", ")", ",", "end"
    value: object  # the number, the text, the name, the upper-case keyword, the operator
    position: int  # 1-based character position in the condition
    source: str    # the characters as written

    def shown(self) -> str:
        return "the end of the condition" if self.kind == "end" else f"'{self.source}'"


def tokens(text: str) -> list[Token]:
    """The tokens of ``text``; an unknown character or an unclosed quote is a :class:`WhereError`."""
    out: list[Token] = []
    i, n = 0, len(text)
    while i < n:
        c = text[i]
        if c.isspace():
            i += 1
            continue
        start = i
        if c in "'\"":
            quoted, i = _quoted(text, i)
            out.append(Token("text" if c == "'" else "quoted", quoted, start + 1, text[start:i]))
            continue
        if c in "(),":
            out.append(Token(c, c, start + 1, c))
            i += 1
            continue
        two = text[i:i + 2]
        if two in COMPARISONS:
            out.append(Token("op", COMPARISONS[two], start + 1, two))
            i += 2
            continue
        if c in COMPARISONS:
            out.append(Token("op", COMPARISONS[c], start + 1, c))
            i += 1
            continue
        number = _NUMBER.match(text, i)
        if number and (c.isdigit() or c == "."):
            i = number.end()
            if i < n and (text[i].isalpha() or text[i] == "_"):
                raise WhereError(f"'{text[start:i + 1]}' is neither a number nor a name; put a column name "
                                 "that starts with a digit in double quotes (\"2024 total\")", start + 1)
            raw = number.group()
            value: float | int = int(raw) if raw.isdigit() else float(raw)
            out.append(Token("number", value, start + 1, raw))
            continue
        bare = _BARE.match(text, i)
        if bare:
            i = bare.end()
            word = bare.group()
            if word.upper() in KEYWORDS:
                out.append(Token("keyword", word.upper(), start + 1, word))
            else:
                out.append(Token("name", word, start + 1, word))
            continue
        if c == "." and out and out[-1].kind in ("name", "quoted"):
            out.append(Token(".", ".", start + 1, "."))
            i += 1
            continue
        if c in "+-":
            out.append(Token("sign", c, start + 1, c))
            i += 1
            continue
        hint = " (text goes in single quotes: 'Q17')" if c in "`[" else ""
        raise WhereError(f"unexpected character '{c}'{hint}", start + 1)
    out.append(Token("end", None, n + 1, ""))
    return out


def _quoted(text: str, i: int) -> tuple[str, int]:
    """The text of a quoted token starting at ``i`` (a doubled quote stands for one) and the index after it."""
    quote, start, parts = text[i], i, []
    i += 1
    while True:
        end = text.find(quote, i)
        if end < 0:
            what = "text" if quote == "'" else "column name"
            raise WhereError(f"the {what} starting with {quote} is not closed; end it with {quote} "
                             f"(a {quote} inside is written twice: {quote}{quote})", start + 1)
        parts.append(text[i:end])
        if text.startswith(quote * 2, end):
            parts.append(quote)
            i = end + 2
            continue
        return "".join(parts), end + 1


# -- the tree -------------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Column:
    name: str
    quoted: bool
    position: int


@dataclass(frozen=True)
class Literal:
    value: object  # int, float, str, or None (NULL)
    position: int


@dataclass(frozen=True)
class Compare:
    op: str
    left: Column | Literal
    right: Column | Literal
    position: int


@dataclass(frozen=True)
class InList:
    operand: Column | Literal
    values: tuple[Literal, ...]
    negated: bool
    position: int


@dataclass(frozen=True)
class Between:
    operand: Column | Literal
    low: Column | Literal
    high: Column | Literal
    negated: bool
    position: int


@dataclass(frozen=True)
class IsNull:
    operand: Column | Literal
    negated: bool
    position: int


@dataclass(frozen=True)
class Like:
    operand: Column | Literal
    pattern: str
    escape: str | None
    negated: bool
    position: int


@dataclass(frozen=True)
class Truth:
    """A column or value standing alone as a condition (``flagged``, ``TRUE``): true where it is not zero."""

    operand: Column | Literal
    position: int


@dataclass(frozen=True)
class Not:
    operand: Node


@dataclass(frozen=True)
class Both:
    op: str  # "AND" or "OR"
    left: Node
    right: Node


Node = Compare | InList | Between | IsNull | Like | Truth | Not | Both


class Parser:
    """condition := or;  or := and (OR and)*;  and := not (AND not)*;  not := NOT not | predicate;
    predicate := '(' condition ')' | operand [comparison operand | [NOT] IN (values) | [NOT] BETWEEN operand AND
    operand | IS [NOT] NULL | [NOT] LIKE 'pattern' [ESCAPE 'c']];  operand := column | value."""

    def __init__(self, text: str) -> None:
        self.text = text
        self.tokens = tokens(text)
        self.i = 0

    @property
    def token(self) -> Token:
        return self.tokens[self.i]

    def take(self) -> Token:
        t = self.tokens[self.i]
        self.i += 1
        return t

    def keyword(self, *words: str) -> bool:
        return self.token.kind == "keyword" and self.token.value in words

    def parse(self) -> Node:
        if self.token.kind == "end":
            raise WhereError(f"the condition is empty; write one such as {EXAMPLE}")
        node = self.disjunction()
        if self.token.kind != "end":
            t = self.token
            if t.kind == ")":
                raise WhereError("')' without a matching '('", t.position)
            raise WhereError(f"unexpected {t.shown()} after a complete condition; join conditions with AND or OR",
                             t.position)
        return node

    def disjunction(self) -> Node:
        node = self.conjunction()
        while self.keyword("OR"):
            self.take()
            node = Both("OR", node, self.conjunction())
        return node

    def conjunction(self) -> Node:
        node = self.negation()
        while self.keyword("AND"):
            self.take()
            node = Both("AND", node, self.negation())
        return node

    def negation(self) -> Node:
        if self.keyword("NOT"):
            self.take()
            return Not(self.negation())
        return self.predicate()

    def predicate(self) -> Node:
        t = self.token
        if t.kind == "(":
            self.take()
            if self.token.kind == ")":
                raise WhereError("empty parentheses; put a condition inside", self.token.position)
            node = self.disjunction()
            if self.token.kind != ")":
                raise WhereError(f"expected ')' to close the '(' at position {t.position}, found "
                                 f"{self.token.shown()}", self.token.position)
            self.take()
            return node
        left = self.operand("a condition (a column, a comparison, NOT or '(')")
        t = self.token
        if t.kind == "op":
            self.take()
            return Compare(str(t.value), left, self.operand(f"a value or a column after '{t.source}'"), t.position)
        negated = False
        if self.keyword("NOT"):
            self.take()
            negated = True
            if not self.keyword("IN", "BETWEEN", "LIKE"):
                raise WhereError(f"expected IN, BETWEEN or LIKE after NOT, found {self.token.shown()}",
                                 self.token.position)
        t = self.token
        if self.keyword("IN"):
            return self.in_list(left, negated)
        if self.keyword("BETWEEN"):
            self.take()
            low = self.operand("the lower bound after BETWEEN")
            if not self.keyword("AND"):
                raise WhereError(f"expected AND between the bounds of BETWEEN, found {self.token.shown()}",
                                 self.token.position)
            self.take()
            return Between(left, low, self.operand("the upper bound after BETWEEN ... AND"), negated, t.position)
        if self.keyword("LIKE"):
            self.take()
            pattern = self.text_value("a pattern in single quotes after LIKE ('%north%')")
            escape = None
            if self.keyword("ESCAPE"):
                self.take()
                at = self.token.position
                escape = self.text_value("one character in single quotes after ESCAPE ('\\')")
                if len(escape) != 1:
                    raise WhereError("ESCAPE takes exactly one character ('\\')", at)
            return Like(left, pattern, escape, negated, t.position)
        if self.keyword("IS"):
            self.take()
            negated = False
            if self.keyword("NOT"):
                self.take()
                negated = True
            if not self.keyword("NULL"):
                raise WhereError(f"expected NULL or NOT NULL after IS, found {self.token.shown()}",
                                 self.token.position)
            self.take()
            return IsNull(left, negated, t.position)
        if t.kind in ("end", ")") or self.keyword("AND", "OR"):
            return Truth(left, left.position)
        after = left.name if isinstance(left, Column) else self.tokens[self.i - 1].source
        raise WhereError(f"expected a comparison after '{after}' (=, <>, <, <=, >, >=, IN, BETWEEN, LIKE, IS NULL), "
                         f"found {t.shown()}", t.position)

    def in_list(self, left, negated: bool) -> InList:
        at = self.take().position
        if self.token.kind != "(":
            raise WhereError(f"expected '(' after IN, found {self.token.shown()}", self.token.position)
        self.take()
        values = []
        while True:
            t = self.token
            operand = self.operand("a value in the IN list")
            if not isinstance(operand, Literal):
                raise WhereError(f"the IN list takes values, not columns ('{operand.name}'); text goes in single "
                                 "quotes", t.position)
            values.append(operand)
            if self.token.kind == ",":
                self.take()
                continue
            if self.token.kind == ")":
                self.take()
                return InList(left, tuple(values), negated, at)
            raise WhereError(f"expected ',' or ')' in the IN list, found {self.token.shown()}", self.token.position)

    def text_value(self, expected: str) -> str:
        t = self.token
        if t.kind != "text":
            raise WhereError(f"expected {expected}, found {t.shown()}", t.position)
        self.take()
        return str(t.value)

    def operand(self, expected: str) -> Column | Literal:
        t = self.token
        if t.kind == "sign":
            self.take()
            number = self.token
            if number.kind != "number":
                raise WhereError(f"expected a number after '{t.source}', found {number.shown()}", number.position)
            self.take()
            value = number.value if t.value == "+" else -number.value  # type: ignore[operator]
            return Literal(value, t.position)
        if t.kind in ("number", "text"):
            self.take()
            return Literal(t.value, t.position)
        if self.keyword("NULL"):
            self.take()
            return Literal(None, t.position)
        if self.keyword("TRUE", "FALSE"):
            self.take()
            return Literal(1 if t.value == "TRUE" else 0, t.position)
        if t.kind in ("name", "quoted"):
            self.take()
            parts, quoted = [str(t.value)], t.kind == "quoted"
            while self.token.kind == ".":  # a qualified name, input.rank, is one column name with its dots
                self.take()
                nxt = self.token
                if nxt.kind not in ("name", "quoted"):
                    raise WhereError(f"expected a name after '.', found {nxt.shown()}", nxt.position)
                self.take()
                parts.append(str(nxt.value))
                quoted = quoted or nxt.kind == "quoted"
            return Column(".".join(parts), quoted, t.position)
        if t.kind == "keyword":
            raise WhereError(f"expected {expected}, found the keyword {t.value} (a column of that name goes in "
                             f"double quotes: \"{t.source}\")", t.position)
        raise WhereError(f"expected {expected}, found {t.shown()}", t.position)


# -- evaluation -----------------------------------------------------------------------------------------------


@dataclass
class Value:
    """An operand over the records: ``kind`` number, text, date or null; ``data`` an array (a column) or a
    scalar (a value); ``known`` where it is not NULL."""

    kind: str
    data: object
    known: np.ndarray | bool
    label: str  # how the error lines name it: column 'amount', the value 5000
    column: bool


class Condition:
    """A parsed WHERE condition; :meth:`mask` applies it to a frame."""

    def __init__(self, text: str) -> None:
        self.text = text
        self.tree = Parser(text).parse()

    def columns(self) -> list[str]:
        """The column names the condition uses, as written."""
        out: list[str] = []

        def walk(node) -> None:
            if isinstance(node, Column):
                out.append(node.name)
            for name in ("left", "right", "operand", "low", "high"):
                child = getattr(node, name, None)
                if child is not None:
                    walk(child)

        walk(self.tree)
        return out

    def check(self, names, listed=None) -> None:
        """A :class:`WhereError` for the first column the condition names that is not among ``names`` (the
        error lists ``listed``, default ``names``)."""
        def walk(node) -> None:
            if isinstance(node, Column):
                resolve_column(node.name, names, quoted=node.quoted, position=node.position, listed=listed)
            for child in ("left", "right", "operand", "low", "high"):
                if getattr(node, child, None) is not None:
                    walk(getattr(node, child))

        walk(self.tree)

    def mask(self, frame: pd.DataFrame) -> np.ndarray:
        """True for the records (rows of ``frame``) for which the condition is true; NULL counts as not true."""
        true, _ = _Evaluator(frame).truth(self.tree)
        return np.asarray(true, dtype=bool) & np.ones(len(frame), dtype=bool)


def parse_where(text: str) -> Condition:
    """The condition of ``text``; a :class:`WhereError` when it cannot be read."""
    return Condition(text)


def where_mask(frame: pd.DataFrame, text: str | Condition) -> np.ndarray:
    """``text`` (or a parsed condition) applied to ``frame``: a boolean mask over its rows."""
    condition = text if isinstance(text, Condition) else parse_where(text)
    return condition.mask(frame)


def resolve_column(name: str, columns, *, quoted: bool = False, position: int | None = None, listed=None) -> str:
    """The column of ``columns`` that ``name`` names: the exact name, or (a bare name) the one column equal to it
    ignoring case; else a :class:`WhereError` naming it, a close match and the columns there are (``listed``,
    when given: a string that says which)."""
    names = [str(c) for c in columns]
    if name in names:
        return name
    if not quoted:
        folded = [c for c in names if c.casefold() == name.casefold()]
        if len(folded) == 1:
            return folded[0]
    close = difflib.get_close_matches(name, names, n=1)
    hint = f" (did you mean '{close[0]}'?)" if close else ""
    if listed is None:
        listed = "the columns are: " + ", ".join(names[:MAX_COLUMNS_LISTED]) + (
            f", ... ({len(names)} in all)" if len(names) > MAX_COLUMNS_LISTED else "")
    raise WhereError(f"no column '{name}'{hint}; {listed}", position, brief=f"no column '{name}'{hint}")


def number_text(x: float) -> str:
    """A number as SQLite writes it for LIKE with numeric affinity: whole numbers as integers (17), others with
    up to 15 significant digits (12.5, 0.3, 1.5e+20)."""
    if not np.isfinite(x):
        return "Inf" if x > 0 else "-Inf" if x < 0 else ""
    if float(x).is_integer() and abs(x) < 2**63:
        return str(int(x))
    text = f"{x:.15g}"
    if "e" in text:
        mantissa, exponent = text.split("e")
        if "." not in mantissa:
            mantissa += ".0"
        return f"{mantissa}e{exponent}"
    return text


def number_texts(x: np.ndarray) -> list[str]:
    """:func:`number_text` of every number, whole numbers at array speed."""
    whole = np.isfinite(x) & (x == np.round(x)) & (np.abs(x) < 2**63)
    out = np.empty(len(x), dtype=object)
    out[whole] = x[whole].astype(np.int64).astype(str)
    out[~whole] = [number_text(float(v)) for v in x[~whole]]
    return list(out)


def like_regex(pattern: str, escape: str | None) -> re.Pattern:
    """The regular expression of an SQL LIKE pattern: % any run, _ one character, ``escape`` makes the next
    character literal; case ignored."""
    parts, i = [], 0
    while i < len(pattern):
        c = pattern[i]
        if escape is not None and c == escape and i + 1 < len(pattern):
            parts.append(re.escape(pattern[i + 1]))
            i += 2
            continue
        parts.append(".*" if c == "%" else "." if c == "_" else re.escape(c))
        i += 1
    return re.compile("".join(parts), re.IGNORECASE | re.DOTALL)


class _Evaluator:
    def __init__(self, frame: pd.DataFrame) -> None:
        self.frame = frame
        self.n = len(frame)
        self.cache: dict[str, Value] = {}

    # -- operands ---------------------------------------------------------------------------------------------
    def value(self, operand: Column | Literal) -> Value:
        if isinstance(operand, Literal):
            v = operand.value
            if v is None:
                return Value("null", None, False, "NULL", False)
            if isinstance(v, str):
                return Value("text", v, True, f"'{v}'", False)
            return Value("number", v, True, f"the value {v}", False)
        name = resolve_column(operand.name, self.frame.columns, quoted=operand.quoted, position=operand.position)
        if name not in self.cache:
            self.cache[name] = self.column_value(name)
        return self.cache[name]

    def column_value(self, name: str) -> Value:
        s = self.frame[name]
        label = f"column '{name}'"
        if pd.api.types.is_bool_dtype(s.dtype):
            known = s.notna().to_numpy(dtype=bool)
            return Value("number", s.fillna(False).to_numpy(dtype=float), known, label, True)
        if pd.api.types.is_numeric_dtype(s.dtype):
            data = s.to_numpy(dtype=float, na_value=np.nan) if not pd.api.types.is_integer_dtype(s.dtype) \
                or s.isna().any() else s.to_numpy()
            known = ~np.isnan(data) if data.dtype.kind == "f" else np.ones(self.n, dtype=bool)
            return Value("number", data, known, label, True)
        if pd.api.types.is_datetime64_any_dtype(s.dtype):
            if getattr(s.dt, "tz", None) is not None:
                s = s.dt.tz_convert("UTC").dt.tz_localize(None)
            return Value("date", s.to_numpy(dtype="datetime64[ns]"), s.notna().to_numpy(dtype=bool), label, True)
        known = s.notna().to_numpy(dtype=bool)
        data = s.to_numpy(dtype=object, copy=True)
        if pd.api.types.infer_dtype(s, skipna=True) not in ("string", "empty"):  # other objects: as their text
            data = np.array([v if isinstance(v, str) else str(v) for v in data], dtype=object)
        data[~known] = ""
        return Value("text", data, known, label, True)

    # -- conditions: (true, false) masks, Kleene's three-valued logic -----------------------------------------
    def truth(self, node: Node) -> tuple[np.ndarray, np.ndarray]:
        if isinstance(node, Both):
            lt, lf = self.truth(node.left)
            rt, rf = self.truth(node.right)
            return (lt & rt, lf | rf) if node.op == "AND" else (lt | rt, lf & rf)
        if isinstance(node, Not):
            t, f = self.truth(node.operand)
            return f, t
        if isinstance(node, Compare):
            return self.compare(node.op, self.value(node.left), self.value(node.right), node.position)
        if isinstance(node, Between):
            v = self.value(node.operand)
            lt, lf = self.compare(">=", v, self.value(node.low), node.position)
            ht, hf = self.compare("<=", v, self.value(node.high), node.position)
            t, f = lt & ht, lf | hf
            return (f, t) if node.negated else (t, f)
        if isinstance(node, InList):
            return self.in_list(node)
        if isinstance(node, IsNull):
            known = self.full(self.value(node.operand).known)
            return (known, ~known) if node.negated else (~known, known)
        if isinstance(node, Like):
            return self.like(node)
        if isinstance(node, Truth):
            v = self.value(node.operand)
            if v.kind == "null":
                return self.full(False), self.full(False)
            if v.kind != "number":
                raise WhereError(f"{v.label} holds {KIND_WORDS[v.kind]}, not true or false; compare it "
                                 f"({_example(v)})", node.position)
            known = self.full(v.known)
            nonzero = self.full(np.asarray(v.data) != 0) if v.column else self.full(bool(v.data != 0))
            return known & nonzero, known & ~nonzero
        raise AssertionError(f"unknown node {node!r}")  # pragma: no cover

    def full(self, x) -> np.ndarray:
        return np.broadcast_to(np.asarray(x, dtype=bool), (self.n,)).copy()

    def compare(self, op: str, a: Value, b: Value, position: int) -> tuple[np.ndarray, np.ndarray]:
        if a.kind == "null" or b.kind == "null":
            return self.full(False), self.full(False)
        a, b = self.align(a, b, position)
        known = self.full(a.known) & self.full(b.known)
        result = np.zeros(self.n, dtype=bool)
        if known.any():
            x = np.asarray(a.data)[known] if a.column else a.data
            y = np.asarray(b.data)[known] if b.column else b.data
            result[known] = _OPS[op](x, y)
        return known & result, known & ~result

    def align(self, a: Value, b: Value, position: int) -> tuple[Value, Value]:
        """The two operands as one kind, following SQLite's affinity rules (docs above); errors otherwise."""
        if a.kind == b.kind:
            return a, b
        if not a.column and b.column:
            b2, a2 = self.align(b, a, position)
            return a2, b2
        if a.kind == "number" and b.kind == "text" and not b.column:
            if not _NUMERIC_TEXT.fullmatch(str(b.data)):
                raise WhereError(f"{a.label} holds numbers, and {b.label} is not one (write {_example(a)})",
                                 position)
            return a, Value("number", float(str(b.data)), True, b.label, False)
        if a.kind == "text" and b.kind == "number" and not b.column:
            text = str(b.data) if isinstance(b.data, int) else number_text(float(b.data))  # type: ignore[arg-type]
            return a, Value("text", text, True, b.label, False)
        if a.kind == "date" and b.kind == "text" and not b.column:
            try:
                stamp = pd.Timestamp(str(b.data))
            except (ValueError, TypeError):
                stamp = pd.NaT
            if pd.isna(stamp):
                raise WhereError(f"{a.label} holds dates, and {b.label} is not one (write a date such as "
                                 "'2025-06-30')", position)
            if stamp.tzinfo is not None:
                stamp = stamp.tz_convert("UTC").tz_localize(None)
            return a, Value("date", np.datetime64(stamp.to_datetime64(), "ns"), True, b.label, False)
        other = f"{b.label} holds {KIND_WORDS[b.kind]}" if b.column else f"{b.label} is {KIND_ONE[b.kind]}"
        raise WhereError(f"{a.label} holds {KIND_WORDS[a.kind]} and {other}; compare like with like", position)

    def in_list(self, node: InList) -> tuple[np.ndarray, np.ndarray]:
        v = self.value(node.operand)
        some_null = any(lit.value is None for lit in node.values)
        hit = np.zeros(self.n, dtype=bool)
        for lit in node.values:
            if lit.value is not None:
                hit |= self.compare("=", v, self.value(lit), lit.position)[0]
        known = self.full(v.known)
        t, f = hit, known & ~hit & (not some_null)
        return (f, t) if node.negated else (t, f)

    def like(self, node: Like) -> tuple[np.ndarray, np.ndarray]:
        v = self.value(node.operand)
        if v.kind == "null":
            return self.full(False), self.full(False)
        regex = like_regex(node.pattern, node.escape)
        known = self.full(v.known)
        texts = self.texts(v, known)
        result = np.zeros(self.n, dtype=bool)
        if v.column:
            idx = np.flatnonzero(known)
            result[idx] = [regex.fullmatch(t) is not None for t in texts]
        elif known.all():
            result[:] = regex.fullmatch(texts[0]) is not None
        t, f = known & result, known & ~result
        return (f, t) if node.negated else (t, f)

    def texts(self, v: Value, known: np.ndarray) -> list[str]:
        """The operand's values as text for LIKE (known values only, for a column)."""
        data = np.asarray(v.data)[known] if v.column else np.asarray([v.data])
        if v.kind == "text":
            return [str(t) for t in data]
        if v.kind == "number":
            return number_texts(np.asarray(data, dtype=float))
        stamps = pd.DatetimeIndex(data)
        timed = bool((stamps != stamps.normalize()).any())
        return list(stamps.strftime("%Y-%m-%d %H:%M:%S" if timed else "%Y-%m-%d"))


def _example(v: Value) -> str:
    name = v.label.removeprefix("column ").strip("'")
    if " " in name or not _BARE.fullmatch(name.replace(".", "_")):
        name = '"' + name.replace('"', '""') + '"'
    return {"number": f"{name} > 5000", "date": f"{name} >= '2025-01-01'"}.get(v.kind, f"{name} = 'Q17'")


_OPS = {
    "=": lambda x, y: np.asarray(x == y, dtype=bool),
    "<>": lambda x, y: np.asarray(x != y, dtype=bool),
    "<": lambda x, y: np.asarray(x < y, dtype=bool),
    "<=": lambda x, y: np.asarray(x <= y, dtype=bool),
    ">": lambda x, y: np.asarray(x > y, dtype=bool),
    ">=": lambda x, y: np.asarray(x >= y, dtype=bool),
}
