"""A file whose column names and keys hold terminal control codes cannot drive the user's terminal.

ESC sequences (ECMA-48: ``ESC [2J`` erases the screen, ``ESC ] 0 ; ... BEL`` sets the window title), a
carriage return and a backspace (overwrite what was printed), the C1 CSI U+009B and the bidi override
U+202E (Unicode UAX #9) are put in the header and the keys of an invented table. No such character may reach
stdout or stderr of any command; each shows in its escaped form, and printable Unicode stays as it is.
The JSON output keeps the real names (it is data, not a terminal).
"""

from __future__ import annotations

import csv
import json
import unicodedata

import numpy as np
import pandas as pd
import pytest

from fixtures.cli import assert_one_line_error

AMOUNT = "amount\x1b[2J"
TITLE = "bad\x1b]0;title\x07name"
MIXED = "x\rover\bback\u202edir\x9bc1"
PLAIN = "café 東京"
KEY = "K\x1b[31mRED\x1b[0m"


def hidden(text: str) -> list[str]:
    """The characters a terminal would act on or hide: controls but the line feed, and format characters."""
    return [c for c in text if (unicodedata.category(c) in ("Cc", "Cf") and c != "\n")]


@pytest.fixture
def hostile(tmp_path):
    rng = np.random.default_rng(1)
    n = 60
    frame = pd.DataFrame({"id": [f"K{i}" for i in range(n)], AMOUNT: rng.normal(100, 10, n),
                          TITLE: rng.normal(5, 1, n), MIXED: rng.normal(0, 1, n), PLAIN: rng.normal(0, 1, n)})
    frame.loc[3, [AMOUNT, MIXED, "id"]] = [500.0, 9.0, KEY]
    path = tmp_path / "hostile.csv"
    frame.to_csv(path, index=False, quoting=csv.QUOTE_NONNUMERIC)  # quoted: the header holds a bare CR
    return path


def clean(out: str, err: str) -> str:
    assert hidden(out) == [], f"stdout carries {sorted(set(map(repr, hidden(out))))}"
    assert hidden(err) == [], f"stderr carries {sorted(set(map(repr, hidden(err))))}"
    return out + err


def test_scan_summary(cli, hostile, tmp_path):
    code, out, err = cli("scan", hostile, "--id", "id", "--out", tmp_path / "r.json")
    assert code == 0, err
    text = clean(out, err)
    for shown in ("amount\\x1b[2J", "bad\\x1b]0;title\\x07name", "x\\rover\\x08back\\u202edir\\x9bc1", PLAIN,
                  "K\\x1b[31mRED"):
        assert shown in text
    # The JSON keeps the real values.
    records = json.loads((tmp_path / "r.json").read_text(encoding="utf-8"))["records"]
    assert records[3]["key"] == KEY
    assert {AMOUNT, MIXED} <= {h["column"] for h in records[3]["column_hits"]}


def test_explain(cli, hostile):
    code, out, err = cli("explain", hostile, "--id", "id", "--key", KEY)
    assert code == 0, err
    text = clean(out, err)
    assert "Record K\\x1b[31mRED\\x1b[0m (row 4)" in text
    assert "amount\\x1b[2J" in text and PLAIN in text


def test_check(cli, hostile, tmp_path):
    reference = tmp_path / "ref.csv"
    reference.write_bytes(hostile.read_bytes())
    code, out, err = cli("check", hostile, "--reference", reference, "--id", "id")
    assert code == 0, err
    assert "amount\\x1b[2J" in clean(out, err)


def test_verdict_and_verdicts(cli, hostile):
    code, out, err = cli("verdict", hostile, "--id", "id", "--key", KEY, "--set", "benign",
                         "--note", "see \x1b[2J here", "--reviewer", "ann\u202e")
    assert code == 0, err
    clean(out, err)
    code, out, err = cli("verdicts", hostile, "--id", "id")
    assert code == 0, err
    text = clean(out, err)
    assert "(id K\\x1b[31mRED\\x1b[0m)" in text and "see \\x1b[2J here" in text


def test_error_messages(cli, hostile):
    # A missing key column: the message lists the columns, names from the data included.
    code, out, err = cli("scan", hostile, "--id", "no\x1b[2Jsuch")
    assert code == 2
    clean(out, err)
    assert_one_line_error(err, "no\\x1b[2Jsuch", "amount\\x1b[2J")
    code, out, err = cli("explain", hostile, "--id", "id", "--key", "K\x1b[2J")
    assert code == 2
    clean(out, err)
    assert_one_line_error(err, "K\\x1b[2J")


def test_usage_errors(cli, hostile):
    code, out, err = cli("scan", hostile, "--engine", "dask\x1b[2J")
    assert code == 2
    clean(out, err)
    assert "dask\\x1b[2J" in err
