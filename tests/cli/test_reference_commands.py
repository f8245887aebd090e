"""`explain`, `report` and `open` take `--reference REF` and make the fit `check` makes; the summary, the report
and the workspace name the records that break a --limits limit. Invented batch records of a fictional paint
works (three correlated measurements and a line), as in tests/pipeline/test_reference.py."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

import investigator
from fixtures.cli import assert_one_line_error
from investigator.output.explanation import explanation_text
from investigator.output.screens import out_of_spec_records


def batches(n: int, seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    base = rng.normal(size=(n, 3)) @ np.array([[1.0, 0.4, 0.2], [0.0, 1.0, 0.3], [0.0, 0.0, 1.0]])
    frame = pd.DataFrame(base * [0.5, 2.0, 0.1] + [50.0, 200.0, 7.0], columns=["viscosity", "pressure", "ph"])
    frame.insert(0, "batch", [f"B{seed}-{i:04d}" for i in range(n)])
    frame["line"] = rng.choice(["L1", "L2"], size=n)
    return frame


@pytest.fixture
def files(tmp_path):
    ref, new = tmp_path / "history.csv", tmp_path / "today.csv"
    batches(150, 11).to_csv(ref, index=False)
    today = batches(12, 12)
    today.loc[5, "ph"] = 7.9
    today.to_csv(new, index=False)
    return ref, new


def test_explain_with_a_reference_is_the_explanation_check_gives(cli, files):
    ref, new = files
    code, out, err = cli("explain", new, "--reference", ref, "--id", "batch", "--key", "B12-0005")
    assert code == 0, err
    checked = investigator.check(new, reference=ref, id="batch")
    e = checked.explain("B12-0005")
    assert out == explanation_text(e) + "\n"
    assert e.peers.source == "reference" and "hotelling" in e.method_scores
    code, plain, _ = cli("explain", new, "--id", "batch", "--key", "B12-0005")  # without: the scan of NEW alone
    assert code == 0 and plain != out


def test_explain_keeps_reference_outliers_on_request(cli, tmp_path):
    ref, new = tmp_path / "history.csv", tmp_path / "today.csv"
    history = batches(150, 11)
    history.loc[:9, ["viscosity", "pressure"]] += [2.5, 9.0]  # ten bad batches in the history
    history.to_csv(ref, index=False)
    batches(12, 12).to_csv(new, index=False)
    args = ("explain", new, "--reference", ref, "--id", "batch", "--row", "3")
    _, cleaned, _ = cli(*args)
    _, kept, _ = cli(*args, "--keep-reference-outliers")
    assert kept == explanation_text(investigator.check(new, reference=ref, id="batch",
                                                       keep_reference_outliers=True).explain(row=3)) + "\n"
    assert kept != cleaned


def test_report_with_a_reference_reports_the_check(cli, files, tmp_path):
    ref, new = files
    html = tmp_path / "report.html"
    code, out, err = cli("report", new, "--reference", ref, "--id", "batch", "--out", html)
    assert code == 0, err
    text = html.read_text(encoding="utf-8")
    assert "<h3>Reference</h3>" in text and str(ref) in text
    cases = tmp_path / "cases.csv"
    code, _, err = cli("report", new, "--reference", ref, "--id", "batch", "--out", cases)
    assert code == 0, err
    table = pd.read_csv(cases)
    assert "flag_hotelling" in table.columns
    checked = investigator.check(new, reference=ref, id="batch")
    assert sorted(table["key"]) == sorted(str(checked.keys[i]) for i in np.flatnonzero(checked.flagged))


def test_report_refuses_to_write_over_the_reference(cli, files):
    ref, new = files
    before = ref.read_bytes()
    html = ref.with_suffix(".html")
    ref.rename(html)
    code, _, err = cli("report", new, "--reference", html, "--out", html)
    assert code == 2
    assert_one_line_error(err, "reference file")
    assert html.read_bytes() == before


def test_open_passes_the_reference_to_the_workspace(cli, files, monkeypatch):
    from investigator.tui.app import InvestigatorApp

    seen = {}
    monkeypatch.setattr(InvestigatorApp, "run", lambda self: seen.update(
        reference=self.reference, sheet=self.reference_sheet, options=self.base_options))
    ref, new = files
    code, _, err = cli("open", new, "--reference", ref, "--id", "batch", "--keep-reference-outliers")
    assert code == 0, err
    assert seen["reference"] == str(ref) and seen["sheet"] is None
    assert seen["options"]["keep_reference_outliers"] is True


@pytest.mark.parametrize("command", ["explain", "report", "open"])
def test_an_unknown_reference_file_is_one_line(cli, files, tmp_path, command):
    _, new = files
    extra = {"explain": ["--row", "1"], "report": ["--out", tmp_path / "r.html"], "open": []}[command]
    code, out, err = cli(command, new, "--reference", tmp_path / "nope.csv", *extra)
    assert code == 2 and out == ""
    assert_one_line_error(err, "nope.csv", "no such file")
    assert not (tmp_path / "r.html").exists()


@pytest.mark.parametrize("command", ["explain", "report", "open"])
@pytest.mark.parametrize("flag", [["--reference-sheet", "2025"], ["--keep-reference-outliers"]])
def test_reference_options_need_a_reference(cli, files, tmp_path, command, flag):
    _, new = files
    extra = {"explain": ["--row", "1"], "report": ["--out", tmp_path / "r.html"], "open": []}[command]
    code, _, err = cli(command, new, *flag, *extra)
    assert code == 2
    assert_one_line_error(err, flag[0], "applies with --reference only")


def test_check_still_needs_its_reference(cli, files):
    _, new = files
    code, _, err = cli("check", new)
    assert code == 2 and "--reference" in err


def test_the_help_of_each_command_lists_the_reference(cli):
    for command in ("explain", "report", "open", "check"):
        code, out, _ = cli(command, "--help")
        assert code == 0 and "--reference REF" in out and "--keep-reference-outliers" in out, command


# -- the records that break a limit, by name ------------------------------------------------------------------


def test_the_summary_names_the_records_that_break_a_limit(cli, files, tmp_path):
    ref, new = files
    limits = tmp_path / "limits.csv"
    limits.write_text("column,lower,upper\nph,6.5,7.5\n")
    code, out, err = cli("check", new, "--reference", ref, "--id", "batch", "--limits", limits)
    assert code == 0, err
    assert ("Out of specification: 1 record breaks a --limits limit (a rule breach, apart from the statistical "
            "flags): B12-0005 (ph 7.9 above 7.5)") in out


def test_beyond_five_the_summary_says_how_many_more(cli, files, tmp_path):
    _, new = files
    limits = tmp_path / "limits.csv"
    limits.write_text("column,lower,upper\nviscosity,,49.9\npressure,199,\n")
    frame = pd.read_csv(new)
    breaking = [i for i in range(len(frame)) if frame.viscosity[i] > 49.9 or frame.pressure[i] < 199]
    assert len(breaking) > 6  # invented so: more than the five named
    code, out, err = cli("scan", new, "--limits", limits)  # no --id: records are named by row
    assert code == 0, err
    line = next(x for x in out.splitlines() if x.startswith("Out of specification"))
    assert f"Out of specification: {len(breaking)} records break" in line
    assert line.endswith(f" and {len(breaking) - 5} more")
    first = breaking[0]
    assert f": row {first + 1} (" in line
    named = line.split("flags): ", 1)[1]
    assert named.count("row ") == 5


def test_a_record_breaking_two_limits_names_both():
    hits = [[], [{"column": "ph", "value": 7.9, "lower": 6.5, "upper": 7.5, "side": "above"},
                 {"column": "pressure", "value": 1200.5, "lower": 150.0, "upper": 250.0, "side": "above"}],
            [{"column": "ph", "value": 6.1, "lower": 6.5, "upper": None, "side": "below"}]]
    assert out_of_spec_records(hits, ["B-1", "B-2", "B-3"]) == \
        "B-2 (ph 7.9 above 7.5; pressure 1,200.5 above 250), B-3 (ph 6.1 below 6.5)"
    assert out_of_spec_records(hits, ["B-1", "B-2", "B-3"], 1, details=False) == "B-2 and 1 more"


def test_the_report_names_the_records_that_break_a_limit(cli, files, tmp_path):
    ref, new = files
    limits = tmp_path / "limits.csv"
    limits.write_text("column,lower,upper\nph,6.5,7.5\n")
    html = tmp_path / "report.html"
    code, _, err = cli("report", new, "--reference", ref, "--id", "batch", "--limits", limits, "--out", html)
    assert code == 0, err
    assert "1 record breaks a --limits limit" in html.read_text() and "B12-0005 (ph 7.9 above 7.5)" in html.read_text()


def test_explanation_text_is_public():
    assert investigator.explanation_text is explanation_text
    assert "explanation_text" in investigator.__all__


def test_the_json_of_check_still_has_every_breach(cli, files, tmp_path):
    ref, new = files
    limits = tmp_path / "limits.csv"
    limits.write_text("column,lower,upper\nph,6.5,7.5\n")
    out = tmp_path / "check.json"
    code, _, err = cli("check", new, "--reference", ref, "--id", "batch", "--limits", limits, "--out", out, "--quiet")
    assert code == 0, err
    records = json.loads(out.read_text())["records"]
    assert [r["key"] for r in records if r["out_of_spec"]] == ["B12-0005"]
