"""The whole command line on generated tables: never a crash, never a non-finite score, never a lost record.

Hypothesis draws the shape of a table (rows, column kinds, missing cells, exact copies, extreme magnitudes,
odd text in number columns, a key column or not, a seed), the table is built from that with NumPy, written
as CSV and given to ``investigator scan --out x.json`` in this process; for some examples also to
``investigator check`` (the first rows as reference) or ``investigator explain --key``. What must hold
(the exit-code contract of docs and DEVELOPERS.md):

* the exit code is 0 (done) or 2 (bad input), never 1 (an internal error) nor an exception;
* on 2, stderr is exactly one line and holds no traceback;
* on 0, every score, z-value and consensus in the JSON is a finite number, and every input row appears
  exactly once, with its key.

Profiles: ``ci`` (the default: 40 examples, tables to 300 rows, derandomised, so CI cannot flap)
and ``long`` (run by hand: ``INVESTIGATOR_HYPOTHESIS=long pytest tests/cli/test_property_input.py``; random,
2,000 examples, tables to 3,000 rows). See DEVELOPERS.md.
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import math
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, Phase, event, given, settings
from hypothesis import strategies as st

from investigator.cli.main import main

# No explain phase: it reruns a failing example a hundred times over (minutes per failure on a scan).
PHASES = (Phase.explicit, Phase.reuse, Phase.generate, Phase.shrink)
QUIET = [HealthCheck.too_slow, HealthCheck.function_scoped_fixture, HealthCheck.data_too_large]
settings.register_profile("ci", max_examples=40, deadline=None, derandomize=True, database=None, print_blob=True,
                          phases=PHASES,
                          suppress_health_check=QUIET)
settings.register_profile("long", max_examples=int(os.environ.get("INVESTIGATOR_HYPOTHESIS_EXAMPLES", "2000")),
                          deadline=None, derandomize=False, print_blob=True, phases=PHASES,
                          suppress_health_check=QUIET)
PROFILE = os.environ.get("INVESTIGATOR_HYPOTHESIS", "ci")
MAX_ROWS = 3000 if PROFILE == "long" else 300

# Magnitudes at the edges of floating point (IEEE 754 doubles: largest 1.7976931348623157e308, smallest
# subnormal 5e-324), zeros of both signs, and values whose square or float32 form overflows.
EXTREMES = (1e308, -1e308, 1.7976931348623157e308, -1.7976931348623157e308, 1e300, 1e200, 1e155, 1e40,
            -1e40, 1e-300, 5e-324, 0.0, -0.0)
# Text a number column of a real file may hold: placeholders, units, separators, spelled-out non-numbers.
ODD_TEXT = ("n/a", "NA", "-", "?", "none", "null", "NaN", "inf", "-inf", "1e999", "12%", "$5", "1,234",
            "1 234", " 7 ", "0x1F", "1.2.3", "TRUE", "—", "ÿ", "12abc", "", "e", ".")
# Text columns as files hold them: separators and quotes, line breaks inside a cell, spreadsheet formulas,
# accents and symbols outside Latin-1, long values.
HOSTILE_TEXT = ("a;b", "tab\there", "line\nbreak", 'quote " inside', "=1+2", "+cmd", "@SUM(A1)", "日本語",
                "emoji \U0001f600", "x" * 300, "  padded  ", "|pipe|", "back\\slash", "\r")
NUMBER_KINDS = ("float", "int", "code", "constant", "sparse", "extreme", "mixed", "thousands")
KINDS = ("float", "int", "code", "text", "bool", "date", "constant", "sparse", "extreme", "mixed", "thousands",
         "hostile")


@dataclass(frozen=True)
class Shape:
    """What the table is made from; the cells themselves come from ``seed``."""

    rows: int
    kinds: tuple[str, ...]
    missing: float  # share of missing cells in each column
    copies: float  # share of rows replaced by exact copies of other rows
    extremes: tuple[tuple[int, int, float], ...]  # (column, row, value), each modulo the table's size
    odd: tuple[tuple[int, int, str], ...]  # odd text in number columns, the same way
    key: bool
    seed: int
    screens: bool  # also --digits, --threshold, --round, --duplicates and --limits on the first number column


@st.composite
def shapes(draw) -> Shape:
    rows = draw(st.one_of(st.integers(1, 12), st.integers(13, 120), st.integers(121, MAX_ROWS)))
    kinds = tuple(draw(st.lists(st.sampled_from(KINDS + ("float", "float", "int")), min_size=1, max_size=8)))
    extremes = draw(st.lists(st.tuples(st.integers(0, 7), st.integers(0, 10_000), st.sampled_from(EXTREMES)),
                             max_size=6))
    odd = draw(st.lists(st.tuples(st.integers(0, 7), st.integers(0, 10_000), st.sampled_from(ODD_TEXT)),
                        max_size=4))
    return Shape(rows, kinds, draw(st.sampled_from((0.0, 0.0, 0.02, 0.3, 0.9))),
                 draw(st.sampled_from((0.0, 0.0, 0.1, 0.6))), tuple(extremes), tuple(odd), draw(st.booleans()),
                 draw(st.integers(0, 2**32 - 1)), draw(st.booleans()))


def build(shape: Shape) -> tuple[list[str], list[list[str]]]:
    """The header and the cells (as the text a CSV holds) of the table ``shape`` describes."""
    rng = np.random.default_rng(shape.seed)
    n = shape.rows
    columns: list[list[str]] = []
    for kind in shape.kinds:
        if kind == "float":
            scale = 10.0 ** rng.integers(-3, 6)
            cells = [repr(float(v)) for v in rng.normal(0, 1, n) * scale + rng.normal(0, 10) * scale]
        elif kind == "int":
            cells = [str(int(v)) for v in rng.integers(-50, 5000, n)]
        elif kind == "code":  # integer codes: most records at one value
            cells = [str(int(v)) for v in rng.choice([0, 0, 0, 1, 2, 7], n)]
        elif kind == "text":
            cells = [str(v) for v in rng.choice(["red", "green", "blue", "a, b", 'say "hi"', "Ünï", "x y z w"], n)]
        elif kind == "bool":
            cells = [str(v) for v in rng.choice(["true", "false"], n)]
        elif kind == "date":
            days = rng.integers(0, 3000, n)
            cells = [str(np.datetime64("2015-01-01") + int(d)) for d in days]
        elif kind == "constant":
            cells = ["4.5"] * n
        elif kind == "extreme":  # nothing but values at the edges of floating point
            cells = [repr(float(v)) for v in rng.choice(EXTREMES, n)]
        elif kind == "mixed":  # numbers and odd text, half and half
            cells = [repr(float(v)) if rng.random() < 0.5 else str(rng.choice(ODD_TEXT)) for v in rng.normal(0, 1, n)]
        elif kind == "thousands":  # numbers written with thousands separators
            cells = [f"{v:,.2f}" for v in rng.lognormal(8, 1, n)]
        elif kind == "hostile":
            cells = [str(v) for v in rng.choice(HOSTILE_TEXT, n)]
        else:  # sparse: a number in about 1 row in 500, blank elsewhere
            cells = [repr(float(v)) if rng.random() < 0.002 else "" for v in rng.normal(100, 5, n)]
        if shape.missing:
            for i in np.flatnonzero(rng.random(n) < shape.missing):
                cells[i] = ""
        columns.append(cells)
    p = len(columns)
    numeric = [j for j, k in enumerate(shape.kinds) if k in NUMBER_KINDS]
    if numeric:
        for j, i, value in shape.extremes:
            columns[numeric[j % len(numeric)]][i % n] = repr(value)
        for j, i, text in shape.odd:
            columns[numeric[j % len(numeric)]][i % n] = text
    rows = [[columns[j][i] for j in range(p)] for i in range(n)]
    if shape.copies and n > 1:
        for i in np.flatnonzero(rng.random(n) < shape.copies):
            rows[i] = list(rows[int(rng.integers(0, n))])
    header = [f"c{j}_{k}" for j, k in enumerate(shape.kinds)]
    if shape.key:
        header = ["record_id", *header]
        rows = [[f"K{i:05d}", *r] for i, r in enumerate(rows)]
    return header, rows


def write(path: Path, header: list[str], rows: list[list[str]]) -> Path:
    with open(path, "w", newline="", encoding="utf-8") as handle:
        # Lines end in CRLF, so that the writer quotes a cell holding either character (with "\n" alone it
        # leaves a lone "\r" bare, which every reader takes for a line break).
        writer = csv.writer(handle, lineterminator="\r\n")
        writer.writerow(header)
        writer.writerows(rows)
    return path


def screen_args(shape: Shape, header: list[str], folder: Path) -> tuple:
    """--digits (Benford, last two digits), --threshold, --round, --duplicates and --limits (a lower and an upper
    limit) on the first number column."""
    names = [h for h, k in zip(header[int(shape.key):], shape.kinds, strict=True) if k in NUMBER_KINDS]
    if not names:
        return ()
    limits = folder / "limits.csv"
    upper = abs(EXTREMES[shape.seed % len(EXTREMES)])  # at least the lower limit, or the file is refused
    limits.write_text(f"column,lower,upper\n{names[0]},-1e300,{upper!r}\n", encoding="utf-8")
    threshold = f"{names[0]}={upper!r}:{max(upper / 10, 1.0)!r}"  # an extreme threshold, a positive band
    return ("--digits", names[0], "--threshold", threshold, "--round", names[0], "--duplicates", names[0],
            "--limits", limits)


def run(*args) -> tuple[int, str, str]:
    """The command in this process: (exit code, stdout, stderr). Any exception escapes: that is a failure."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main([str(a) for a in args])
        except SystemExit as exc:  # argparse usage errors
            code = exc.code
    return code, out.getvalue(), err.getvalue()


def assert_contract(code: int, err: str, what: str) -> None:
    assert code in (0, 2), f"{what}: exit {code}: {err}"
    if code == 2:
        assert "Traceback" not in err, err
        assert err.endswith("\n") and err.count("\n") == 1, f"{what}: stderr is not one line: {err!r}"


def finite(value) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool) and math.isfinite(value)


def assert_finite_records(document: dict, n: int, keys: list | None) -> None:
    records = document["records"]
    assert sorted(r["row"] for r in records) == list(range(1, n + 1))  # every row exactly once
    for r in records:
        assert r["key"] == (keys[r["row"] - 1] if keys is not None else r["row"]), r["key"]
        values = [*r["scores"].values(), r["consensus"], r["consensus_z"]]
        assert all(finite(v) for v in values), (r["row"], r["scores"], r["consensus"], r["consensus_z"])
        for t in r["top_features"] or []:
            assert finite(t["robust_z"]) and finite(t["share"]), t
        for parts in (r["contributions"] or {}).values():
            assert all(finite(c["value"]) and finite(c["share"]) for c in parts), parts


@settings(settings.get_profile(PROFILE))
@given(shape=shapes(), extra=st.sampled_from(("none", "none", "check", "explain")))
def test_any_table_gives_a_result_or_a_one_line_error(shape: Shape, extra: str):
    header, rows = build(shape)
    with tempfile.TemporaryDirectory() as tmp:
        data = write(Path(tmp) / "table.csv", header, rows)
        id_args = ("--id", "record_id") if shape.key else ()
        screens = screen_args(shape, header, Path(tmp)) if shape.screens else ()
        out = Path(tmp) / "result.json"
        code, _, err = run("scan", data, "--out", out, "--map", "none", "--quiet", *id_args, *screens)
        assert_contract(code, err, "scan")
        event(f"scan exit {code}" + (f": {err.split(': error: ')[-1][:60]}" if code else ""))
        if code == 0:
            keys = [r[0] for r in rows] if shape.key else None
            assert_finite_records(json.loads(out.read_text(encoding="utf-8")), len(rows), keys)
        if extra == "check" and len(rows) >= 10:
            half = len(rows) // 2
            reference = write(Path(tmp) / "reference.csv", header, rows[:half])
            new = write(Path(tmp) / "new.csv", header, rows[half:])
            checked = Path(tmp) / "checked.json"
            code, _, err = run("check", new, "--reference", reference, "--out", checked, "--map", "none",
                               "--quiet", *id_args, *screens)
            assert_contract(code, err, "check")
            if code == 0:
                keys = [r[0] for r in rows[half:]] if shape.key else None
                assert_finite_records(json.loads(checked.read_text(encoding="utf-8")), len(rows) - half, keys)
        elif extra == "explain" and code == 0:
            which = ("--key", rows[0][0]) if shape.key else ("--row", 1)
            code, _, err = run("explain", data, "--map", "none", *which, *id_args)
            assert_contract(code, err, "explain")
