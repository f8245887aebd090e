"""The amount screens in the HTML report: each screen's sentence, the records it lists (the first 20, then a
count), and names and keys from the data escaped (OWASP XSS prevention: HTML-encode untrusted data in element
content). Invented claims."""

from __future__ import annotations

from html.parser import HTMLParser

import numpy as np
import pandas as pd
import pytest

import investigator
from investigator.report import write_report

pytestmark = pytest.mark.slow  # a scan and a report with plots

HOSTILE = "<script>alert(1)</script>"
COLUMN = "amount<b>"


class Text(HTMLParser):
    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.parts: list[str] = []
        self.tags: list[str] = []
        self.feed(text)

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)

    def handle_data(self, data):
        self.parts.append(data)


@pytest.fixture(scope="module")
def page(tmp_path_factory):
    rng = np.random.default_rng(31)
    n = 400
    amounts = np.round(rng.lognormal(np.log(600), 0.8, n), 2)
    amounts[:30] = np.round(rng.uniform(4900, 4999.99, 30), 2)  # kept under an approval limit of 5,000
    amounts[30] = 2500.0
    frame = pd.DataFrame({"claim": [f"K{i:04d}" for i in range(n)], "nights": rng.integers(0, 3, n),
                          COLUMN: amounts})
    frame.loc[0, "claim"] = HOSTILE
    result = investigator.scan(frame, id="claim", threshold=f"{COLUMN}=5000", digits=COLUMN,
                               methods="isolation")
    out = write_report(result, tmp_path_factory.mktemp("report") / "report.html")
    return result, out.read_text(encoding="utf-8")


def test_the_screens_are_in_the_report_with_their_records(page):
    result, text = page
    plain = "".join(Text(text).parts)
    limit = result.run.screens["thresholds"][0]
    assert (f"Just below {COLUMN} 5,000: {limit['below']:,} records from 4,750 to under 5,000 against "
            f"{limit['above']:,}") in plain
    assert f"Round amounts, {COLUMN}: " in plain and f"Last two digits, {COLUMN}: chi-square" in plain
    # The 30 claims below the limit are listed: the first 20 in a table, then how many more.
    assert limit["below"] >= 30
    assert f"... and {limit['below'] - 20:,} more records (all in the JSON run record, run.screens.thresholds)" \
        in plain
    for record in limit["records"][:20]:
        assert f"{record['row']:,}" in plain
    assert "K0001" in plain


def test_names_and_keys_from_the_data_are_escaped(page):
    _, text = page
    parser = Text(text)
    assert "<script" not in text.lower() and "<b>" not in text
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text and "amount&lt;b&gt;" in text
    assert "b" not in parser.tags and "script" not in parser.tags
    assert HOSTILE in "".join(parser.parts)  # shown as text
