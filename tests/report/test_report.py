"""The report: HTML sections, self-containment, escaping, spreadsheet safety, a real browser, determinism,
verdicts and bad input.

Data is invented: the built-in demo (scanned once for the session, tests/conftest.py) and a small table of
hostile values.
"""

from __future__ import annotations

import base64
import csv
import hashlib
import io
import os
import re
import shutil
import sqlite3
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook
from PIL import Image

import investigator
from investigator.io.demo import DEMO_ID
from investigator.report import write_report
from investigator.report.plots import FLAGGED, ORDINARY, contributions_plot
from investigator.review.matching import fingerprint, record_values
from investigator.review.store import Case, ReviewStore, key_case_id

SECTIONS = ("summary", "scanned", "method", "found", "verdicts", "cases", "cautions")
HOSTILE = "<script>alert(1)</script>"
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")  # OWASP, "CSV Injection"
GENERATED = re.compile(r'<p id="generated"[^>]*>.*?</p>')


class Page(HTMLParser):
    """Everything the tests look at in a page: tags with their attributes, ids, images, text per id."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []
        self.feed(text)
        self.close()

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_startendtag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data):
        self.text.append(data)

    @property
    def ids(self) -> list[str]:
        return [a["id"] for _, a in self.tags if "id" in a]

    def images(self) -> list[bytes]:
        prefix = "data:image/png;base64,"
        return [base64.b64decode(a["src"][len(prefix):]) for t, a in self.tags if t == "img"]

    def plain(self) -> str:
        return "".join(self.text)


@pytest.fixture(scope="module")
def demo(demo_scan, tmp_path_factory):
    """The session's demo scan (tests/conftest.py) and its report, written once for the module."""
    path, result = demo_scan
    report = write_report(result, tmp_path_factory.mktemp("report") / "report.html")
    return path, result, report.read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def hostile(tmp_path_factory) -> Path:
    """Invented invoices; one record has a hostile key and category and an extreme amount (so it is flagged),
    others have formula-like keys."""
    rng = np.random.default_rng(5)
    n = 60
    frame = pd.DataFrame({
        "ref": [f"R{i:03d}" for i in range(n)],
        "amount": rng.normal(200, 20, n).round(2),
        "hours": rng.normal(8, 1, n).round(1),
        "site": rng.choice(["north", "south"], n),
    })
    frame.loc[0, ["ref", "site", "amount", "hours"]] = [HOSTILE, HOSTILE, 5000.0, 30.0]
    frame.loc[1, ["ref", "amount", "hours"]] = ['=HYPERLINK("http://example.invalid","x")', 4000.0, 1.0]
    frame.loc[2, ["ref", "amount", "hours"]] = ["+1+2", 3500.0, 25.0]
    frame.loc[3, ["ref", "amount", "hours"]] = ["@SUM(A1)", 3000.0, 0.5]
    folder = tmp_path_factory.mktemp("hostile")
    path = folder / "invoices.csv"
    frame.to_csv(path, index=False)
    return path


# -- the HTML -------------------------------------------------------------------------------------------------


@pytest.mark.slow
def test_every_section_is_present_in_reading_order(demo):
    path, result, text = demo
    page = Page(text)
    ids = page.ids
    for section in SECTIONS:
        assert section in ids, f"section {section} missing"
    assert [s for s in ids if s in SECTIONS] == list(SECTIONS)  # summary first, detail after
    assert "groups" in ids and "map" not in ids  # the demo has a group of split purchases; no --map given
    plain = page.plain()
    # The file's SHA-256 as computed here by hashlib, and the counts as the scan has them.
    assert hashlib.sha256(path.read_bytes()).hexdigest() in plain
    n_flagged = int(result.flagged.sum())
    assert f"{n_flagged:,} of {result.n_records:,} records" in plain
    assert result.run.rule in plain
    for feature in result.features.names:
        assert feature in plain
    for notice in result.run.notices:
        assert notice in plain
    for package, version in result.run.versions.items():
        assert package in plain and version in plain
    assert "not proof of error or fraud" in plain and "audit standards or quality system" in plain
    assert "no data left the machine" in plain


@pytest.mark.slow
def test_cases_are_ranked_by_consensus_and_the_rest_counted(demo, tmp_path):
    _, result, text = demo
    flagged = [i for i in result.ranking() if result.flagged[i]]
    page = Page(text)
    articles = [a["id"] for t, a in page.tags if t == "h3" and a.get("id", "").startswith("case-")]
    assert len(articles) == min(50, len(flagged))
    # The headings, in order, name the flagged records in the order of the scan's ranking.
    headings = re.findall(r'<h3 id="case-(\d+)">\d+\. ([^<]+)</h3>', text)
    assert [int(n) for n, _ in headings] == list(range(1, len(headings) + 1))
    assert [h.split(" (row")[0] for _, h in headings] == [str(result.keys[i]) for i in flagged[:50]]
    small = write_report(result, tmp_path / "five.html", cases=5).read_text(encoding="utf-8")
    assert len(re.findall(r'<h3 id="case-\d+">', small)) == 5
    assert f"{len(flagged) - 5:,} flagged records left out here (--cases 5" in Page(small).plain()
    explanation = result.explainer.flagged()[flagged[0]]
    top = explanation.top_features[0]
    first = text[text.index('id="case-1"'):text.index('id="case-2"')]
    assert f"<td>{top.feature}</td>" in first and top.direction in first


@pytest.mark.slow
def test_no_external_url_or_script(demo):
    _, _, text = demo
    page = Page(text)
    for tag, attrs in page.tags:
        assert tag not in ("script", "link", "iframe", "object", "embed", "base", "form", "frame"), tag
        assert not any(name.startswith("on") for name in attrs), (tag, attrs)
        for name in ("src", "href", "srcset", "action", "poster", "data", "background"):
            value = attrs.get(name)
            if value is None:
                continue
            if name == "href":
                assert value.startswith("#"), value  # only links within the page
            else:
                assert value.startswith("data:image/png;base64,"), value[:40]
    outside = re.sub(r'data:image/png;base64,[A-Za-z0-9+/=]+', "", text)  # base64 may hold "//"
    for marker in ("http:", "https:", "//", "ftp:", "file:", "url(", "@import"):
        assert marker not in outside, marker
    assert len(page.images()) >= 3


@pytest.mark.slow
def test_hostile_values_are_escaped(cli, hostile, tmp_path):
    note = f"{HOSTILE} and <img src=x onerror=alert(2)>"
    code, _, err = cli("verdict", hostile, "--id", "ref", "--key", HOSTILE, "--set", "follow-up",
                   "--note", note, "--reviewer", "<b>auditor</b>")
    assert code == 0, err
    out = tmp_path / "report.html"
    code, _, err = cli("report", hostile, "--id", "ref", "--out", out)
    assert code == 0, err
    text = out.read_text(encoding="utf-8")
    page = Page(text)
    # OWASP XSS prevention: untrusted data HTML-encoded in content and attributes; no markup gets through.
    assert "<script" not in text.lower() and "<img src=x" not in text and "<b>auditor" not in text
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert "&lt;img src=x onerror=alert(2)&gt;" in text
    assert {t for t, _ in page.tags} <= {"html", "head", "meta", "title", "style", "body", "main", "section",
                                         "h1", "h2", "h3", "h4", "p", "span", "strong", "a", "nav", "dl", "dt",
                                         "dd", "ul", "ol", "li", "table", "thead", "tbody", "tr", "th", "td",
                                         "img", "article"}
    plain = page.plain()
    assert HOSTILE in plain and note in plain  # shown as text, where the reader can see it
    assert "<b>auditor</b>" in plain


# -- the spreadsheet ------------------------------------------------------------------------------------------


def test_xlsx_stores_formula_like_cells_as_text(hostile, tmp_path):
    result = investigator.scan(hostile, id="ref")
    out = write_report(result, tmp_path / "cases.xlsx")
    sheet = load_workbook(out).active
    header = [c.value for c in sheet[1]]
    assert header[:9] == ["case", "rank", "row", "key", "consensus", "consensus_z", "votes", "flagged", "flag_reason"]
    assert {"top_features", "column_hits", "nearest_ordinary_change", "verdict", "note"} <= set(header)
    keys = [sheet.cell(row=r, column=header.index("key") + 1).value for r in range(2, sheet.max_row + 1)]
    flagged = [str(result.keys[i]) for i in result.ranking() if result.flagged[i]]
    assert keys == [k if not k.startswith(FORMULA_START) else "'" + k for k in flagged]
    # OWASP "CSV Injection": formula-like cells get a leading apostrophe, and none is stored as a formula.
    risky = {'=HYPERLINK("http://example.invalid","x")', "+1+2", "@SUM(A1)"}
    assert risky <= set(flagged), "the planted records should be flagged"
    assert {"'" + k for k in risky} <= set(keys)
    for row in sheet.iter_rows():
        for cell in row:
            assert cell.data_type != "f", (cell.coordinate, cell.value)
            if isinstance(cell.value, str):
                assert not cell.value.startswith(FORMULA_START), (cell.coordinate, cell.value)


def test_csv_cases_table_is_neutralised(hostile, tmp_path):
    result = investigator.scan(hostile, id="ref")
    out = write_report(result, tmp_path / "cases.csv")
    with out.open(newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    header, body = rows[0], rows[1:]
    assert len(body) == int(result.flagged.sum())
    key = header.index("key")
    assert "'=HYPERLINK(\"http://example.invalid\",\"x\")" in [r[key] for r in body]
    for row in body:
        for cell in row:
            assert not cell.startswith(FORMULA_START), cell  # OWASP, "CSV Injection"
    tops = [r[header.index("top_features")] for r in body]
    assert all(tops) and "amount" in tops[0]


# -- a real browser -------------------------------------------------------------------------------------------


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return "/usr/bin/chromium" if os.access("/usr/bin/chromium", os.X_OK) else None


def _screenshot(browser: str, page: Path, png: Path, profile: Path) -> list[str]:
    """Render ``page`` headless at 1280 px wide; return the console lines logged from the page."""
    run = subprocess.run(
        [browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-extensions", f"--user-data-dir={profile}", "--window-size=1280,2000",
         f"--screenshot={png}", "--enable-logging=stderr", "--v=0", page.as_uri()],
        capture_output=True, text=True, timeout=120)
    assert png.exists(), f"no screenshot; chromium said: {run.stderr[-2000:]}"
    # Chromium logs page console messages as `...:CONSOLE...] "message", source: file:///... (line)`.
    return [line for line in run.stderr.splitlines()
            if ("CONSOLE" in line and page.as_uri() in line) or "Uncaught" in line]


@pytest.mark.slow
def test_the_report_renders_in_chromium(demo, tmp_path):
    browser = _chromium()
    if browser is None:
        pytest.skip("chromium is not installed (Debian: apt-get install -y chromium; .ci/run does this "
                    "where it can)")
    _, _, text = demo
    page = tmp_path / "report.html"
    page.write_text(text, encoding="utf-8")
    # First a page with a script error, to show the console check catches one when there is one.
    control = tmp_path / "control.html"
    control.write_text("<!DOCTYPE html><html><body><p>x</p><script>missing();</script></body></html>")
    assert _screenshot(browser, control, tmp_path / "control.png", tmp_path / "profile-a"), \
        "the console check saw nothing on a page with an error: it cannot be trusted"
    shot = tmp_path / "report.png"
    errors = _screenshot(browser, page, shot, tmp_path / "profile-b")
    assert errors == []
    image = Image.open(shot).convert("RGB")
    assert image.width == 1280
    colours = image.getcolors(maxcolors=1 << 20)
    assert len(colours) > 100, "the screenshot is (nearly) blank"
    # The consensus plot sits in the summary, within the first screen: its two colours must be on it.
    pixels = np.asarray(image).reshape(-1, 3).astype(int)
    for hex_colour in (FLAGGED, ORDINARY):
        rgb = np.array([int(hex_colour[i:i + 2], 16) for i in (1, 3, 5)])
        assert (np.abs(pixels - rgb).sum(axis=1) <= 6).sum() > 200, f"plot colour {hex_colour} not on screen"
    for png in Page(text).images():
        plot = Image.open(io.BytesIO(png))
        plot.load()  # decodes the whole image
        assert plot.format == "PNG" and plot.width > 300 and plot.height > 150
        assert len(plot.convert("RGB").getcolors(maxcolors=1 << 20)) > 20, "an embedded plot is blank"


# -- determinism ----------------------------------------------------------------------------------------------


@pytest.mark.slow
def test_the_same_scan_gives_the_same_report(demo, tmp_path):
    # Two more runs, each in its own process with its own string hashing (so nothing may depend on set or
    # hash order), against the module's report made in this process through the API.
    path, _, text = demo
    outs = [tmp_path / f"again-{seed}.html" for seed in (1, 2)]
    runs = [subprocess.Popen([sys.executable, "-m", "investigator", "report", str(path), "--id", DEMO_ID,
                              "--out", str(out)], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                             env={**os.environ, "PYTHONHASHSEED": str(seed)})
            for seed, out in enumerate(outs, 1)]
    for run in runs:  # side by side: the two scans take the time of one on two cores
        _, err = run.communicate(timeout=300)
        assert run.returncode == 0, err
    reports = [out.read_text(encoding="utf-8") for out in outs]
    for again in reports:
        assert len(GENERATED.findall(again)) == 1
        assert GENERATED.sub("", again) == GENERATED.sub("", text)
    assert len(GENERATED.findall(text)) == 1


# -- colours ---------------------------------------------------------------------------------------------------
# Okabe & Ito (2008), "Color Universal Design": the eight colours of the colour-blind-safe palette, in the order
# the features take them (hex values from memory; black, the palette's first, last).
OKABE_ITO = ("#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7", "#000000")


def _pixels(png: bytes) -> set[tuple[int, int, int]]:
    image = Image.open(io.BytesIO(png)).convert("RGB")
    return {rgb for _, rgb in image.getcolors(maxcolors=1 << 20)}


def _rgb(hex_colour: str) -> tuple[int, int, int]:
    return tuple(int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))


def test_features_take_the_colour_blind_safe_palette_in_order():
    features = [f"feature {j}" for j in range(9)]  # one more than the palette: the ninth repeats the first
    cases = [(f"case {i}", [(name, 1 / len(features)) for name in features]) for i in range(3)]
    pixels = _pixels(contributions_plot(cases))
    for hex_colour in OKABE_ITO:
        assert _rgb(hex_colour) in pixels, hex_colour
    # matplotlib's default cycle starts with #1f77b4 (blue) and #ff7f0e (orange): neither is drawn.
    assert _rgb("#1f77b4") not in pixels and _rgb("#ff7f0e") not in pixels
    # The first three features of a smaller figure take the palette's first three colours, and no other of
    # its colours (black aside: the text is black).
    few = _pixels(contributions_plot([("case", [("a", 0.5), ("b", 0.3), ("c", 0.2)])]))
    assert {_rgb(c) for c in OKABE_ITO[:3]} <= few and not {_rgb(c) for c in OKABE_ITO[3:-1]} & few


# -- verdicts -------------------------------------------------------------------------------------------------


@pytest.mark.slow
def test_verdicts_and_their_history_appear(cli, demo, tmp_path):
    path, result, _ = demo
    store = tmp_path / "review.sqlite"
    flagged = [i for i in result.ranking() if result.flagged[i]]
    first, second = str(result.keys[flagged[0]]), str(result.keys[flagged[1]])
    ordinary = int(np.flatnonzero(~result.flagged)[0])
    for key, state, note in ((first, "follow-up", "ask the approver"), (first, "confirmed", None),
                             (str(result.keys[ordinary]), "benign", "looked at: a regular trip")):
        args = ["verdict", path, "--id", DEMO_ID, "--key", key, "--set", state, "--store", store,
                "--reviewer", "A. Reviewer"]
        code, _, err = cli(*(args + (["--note", note] if note is not None else [])))
        assert code == 0, err
    with ReviewStore(store) as review:
        # As if the second case had other values when judged, and one record had since left the data.
        values = record_values(result.table, flagged[1])
        then = {**values, "amount": 12.5}
        review.set(Case(key_case_id(DEMO_ID, second), "record", DEMO_ID, second, flagged[1] + 1,
                        fingerprint(then), then), "benign", "amount checked")
        gone = {**values, DEMO_ID: "CLM-99999"}
        review.set(Case(key_case_id(DEMO_ID, "CLM-99999"), "record", DEMO_ID, "CLM-99999", 9999,
                        fingerprint(gone), gone), "confirmed", "a record since removed")
    before = sqlite3.connect(store).execute("SELECT COUNT(*) FROM history").fetchone()[0]
    text = write_report(result, tmp_path / "report.html", store=store, cases=1).read_text(encoding="utf-8")
    page = Page(text)
    plain = page.plain()
    # With --cases 1 the top case is detailed, and so is every other record with a verdict: the second
    # flagged record under its rank, the unflagged one after them.
    details = [i for i in page.ids if i.startswith(("case-", "record-"))]
    assert details == ["case-1", "case-2", f"record-{ordinary + 1}"]
    assert f"{len(flagged) - 2:,} flagged records left out here" in plain
    verdicts = Page(text[text.index('<section id="verdicts">'):text.index('<section id="cases">')]).plain()
    # Three records of the data carry a verdict (one changed since), one verdict's record is gone.
    assert "3 in force on records of this data (2 benign, 1 confirmed); 1 changed since the verdict; 1 whose " \
           "record is not in the data; 5 changes in the history" in plain
    for word in ("follow-up", "confirmed", "benign", "ask the approver", "amount checked", "A. Reviewer",
                 "CLM-99999", "a record since removed", "looked at: a regular trip"):
        assert word in verdicts, word
    assert "Records changed since their verdict" in verdicts and "12.5" in verdicts
    assert "Verdicts whose record is not in the data" in verdicts
    # The history lists every change, oldest first: the first key's two verdicts in order.
    assert verdicts.index("follow-up") < verdicts.rindex("confirmed")
    case_1 = text[text.index('id="case-1"'):text.index('id="case-2"')]
    assert "confirmed" in case_1 and "ask the approver" in case_1  # the new verdict kept the note
    assert sqlite3.connect(store).execute("SELECT COUNT(*) FROM history").fetchone()[0] == before
    sheet = load_workbook(write_report(result, tmp_path / "cases.xlsx", store=store)).active
    header = [c.value for c in sheet[1]]
    rows = {r[header.index("key")]: r for r in sheet.iter_rows(min_row=2, values_only=True)}
    assert rows[first][header.index("verdict")] == "confirmed"
    assert rows[second][header.index("changed_since_verdict")] is True
    assert str(result.keys[ordinary]) in rows  # a record with a verdict is a case even when not flagged
    assert len(rows) == len(flagged) + 1


@pytest.mark.slow
def test_no_store_is_created_by_a_report(demo):
    path, _, text = demo
    assert not Path(str(path) + ".investigation.sqlite").exists()
    assert "no verdicts or notes are recorded yet" in Page(text).plain()


# -- groups and the map, when the result has them -------------------------------------------------------------


@pytest.mark.slow
def test_groups_and_map_sections_appear_when_present(demo, tmp_path):
    path, _, _ = demo
    result = investigator.scan(path, id=DEMO_ID, map="pca")
    text = write_report(result, tmp_path / "report.html").read_text(encoding="utf-8")
    page = Page(text)
    assert "groups" in page.ids and "map" in page.ids and "plot-map" in page.ids
    assert page.ids.index("found") < page.ids.index("groups") < page.ids.index("verdicts")
    plain = page.plain()
    case = result.group_cases[0]
    assert f"Group {case.group}: {case.size} records" in plain
    assert str(case.members[0].key) in plain
    assert case.profile[0].feature in plain


def test_out_is_required(cli, hostile):
    code, _, err = cli("report", hostile)
    assert code == 2 and "--out" in err and "Traceback" not in err
