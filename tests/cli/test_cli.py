"""The command line: help, exit codes (0 done, 2 bad input or usage, 1 internal error) and the JSON output.

Data is invented here with a fixed seed; every scan is a few dozen rows.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

import investigator.pipeline.engine
from fixtures.cli import assert_one_line_error, run
from fixtures.tables import SHAPES, make_frame
from investigator.cli.main import main

N = SHAPES["deliveries"].n  # records in the invented deliveries table


# -- help and usage ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("args", [["--help"], ["scan", "--help"], ["demo", "--help"]])
def test_help_exits_0(args):
    done = run(*args)
    assert done.returncode == 0, done.stderr
    assert done.stdout.startswith("usage: investigator")
    assert done.stderr == ""


def test_scan_help_lists_the_options():
    out = run("scan", "--help").stdout
    for option in ("--id", "--features", "--exclude", "--methods", "--cutoff", "--contamination", "--seed",
                   "--sheet", "--out"):
        assert option in out


def test_version_exits_0():
    done = run("--version")
    assert done.returncode == 0
    assert done.stdout.strip() == f"investigator {investigator.__version__}"


def test_no_command_exits_2():
    done = run()
    assert done.returncode == 2
    assert "usage: investigator" in done.stdout + done.stderr
    assert "Traceback" not in done.stderr


def test_no_command_in_process(capsys):
    assert main([]) == 2
    out, _ = capsys.readouterr()
    assert "scan" in out and "demo" in out


@pytest.mark.parametrize(
    "args, word",
    [
        (["frobnicate"], "frobnicate"),
        (["scan"], "DATA"),
        (["scan", "x.csv", "--bogus"], "--bogus"),
        (["scan", "x.csv", "--cutoff", "high"], "--cutoff"),
        (["scan", "x.csv", "--seed", "1.5"], "--seed"),
        (["scan", "x.csv", "--top", "many"], "--top"),
    ],
)
def test_usage_errors_exit_2_with_one_line(args, word):
    done = run(*args)
    assert done.returncode == 2
    assert_one_line_error(done.stderr, word, "--help")


# -- bad input through a real process ------------------------------------------------------------------------


@pytest.mark.slow
def test_missing_file_subprocess(tmp_path):
    done = run("scan", tmp_path / "absent.csv")
    assert done.returncode == 2
    assert_one_line_error(done.stderr, "absent.csv", "no such file")
    assert done.stdout == ""


@pytest.mark.slow
def test_corrupt_xlsx_subprocess(tmp_path):
    (tmp_path / "noise.xlsx").write_bytes(np.random.default_rng(5).bytes(800))
    done = run("scan", tmp_path / "noise.xlsx")
    assert done.returncode == 2
    assert_one_line_error(done.stderr, "noise.xlsx", ".xlsx")


@pytest.mark.slow
def test_unknown_id_subprocess(tmp_path):
    make_frame("deliveries").to_csv(tmp_path / "deliveries.csv", index=False)
    done = run("scan", tmp_path / "deliveries.csv", "--id", "order")
    assert done.returncode == 2
    assert_one_line_error(done.stderr, "deliveries.csv", "'order'", "delivery")


@pytest.mark.parametrize(
    "option, value, word",
    [("--cutoff", "2", "--cutoff"), ("--contamination", "0.9", "--contamination"),
     ("--methods", "nope", "'nope'"), ("--seed", "-1", "--seed")],
)
@pytest.mark.slow
def test_bad_option_values_subprocess(tmp_path, option, value, word):
    make_frame("deliveries").to_csv(tmp_path / "deliveries.csv", index=False)
    done = run("scan", tmp_path / "deliveries.csv", option, value)
    assert done.returncode == 2
    assert_one_line_error(done.stderr, word)


# -- output files --------------------------------------------------------------------------------------------


@pytest.fixture
def deliveries(tmp_path):
    frame = make_frame("deliveries")
    frame.loc[7, "minutes"] = np.nan
    frame.loc[20, "distance"] = 900.0
    frame.to_csv(tmp_path / "deliveries.csv", index=False)
    return tmp_path / "deliveries.csv", frame


def test_json_output_has_keys_and_imputed(deliveries, tmp_path, capsys):
    path, frame = deliveries
    out = tmp_path / "result.json"
    assert main(["scan", str(path), "--id", "delivery", "--out", str(out), "--quiet"]) == 0
    stdout, stderr = capsys.readouterr()
    assert stdout == "" and stderr == ""
    data = json.loads(out.read_text(encoding="utf-8"))
    records = data["records"]
    assert [r["key"] for r in records] == list(frame["delivery"])
    assert [r["row"] for r in records] == list(range(1, N + 1))
    assert data["run"]["input"]["key"] == "delivery"
    assert records[7]["imputed"] == ["minutes"]
    assert [r["key"] for r in records if r["imputed"]] == ["D007"]
    assert set(records[0]["scores"]) == {"robust_distance", "local_density", "isolation", "neighbor_distance"}
    # The planted distance of 900 (about 20 times the usual) is the most unusual record.
    top = max(records, key=lambda r: r["consensus"])
    assert top["key"] == "D020"


def test_json_output_without_id_keys_by_row(deliveries, tmp_path, capsys):
    path, _ = deliveries
    out = tmp_path / "result.json"
    assert main(["scan", str(path), "--out", str(out), "--quiet", "--methods", "robust_distance"]) == 0
    data = json.loads(out.read_text(encoding="utf-8"))
    assert [r["key"] for r in data["records"]] == list(range(1, N + 1))
    assert data["run"]["input"]["key"] == "row"
    assert set(data["records"][0]["scores"]) == {"robust_distance"}


@pytest.mark.parametrize("suffix", [".csv", ".parquet"])
def test_table_outputs(deliveries, tmp_path, capsys, suffix):
    path, frame = deliveries
    out = tmp_path / f"result{suffix}"
    assert main(["scan", str(path), "--id", "delivery", "--out", str(out), "--quiet"]) == 0
    table = pd.read_csv(out) if suffix == ".csv" else pd.read_parquet(out)
    assert list(table["key"]) == list(frame["delivery"])
    assert table.loc[7, "imputed"] == "minutes"


def test_summary_printed_without_quiet(deliveries, tmp_path, capsys):
    path, _ = deliveries
    out = tmp_path / "result.json"
    assert main(["scan", str(path), "--id", "delivery", "--out", str(out)]) == 0
    stdout, _ = capsys.readouterr()
    assert "deliveries.csv" in stdout
    assert f"Result written to {out}" in stdout


@pytest.mark.parametrize("name", ["x.txt", "result.xlsx", "noext"])
def test_unknown_output_format_exits_2(deliveries, tmp_path, capsys, name):
    path, _ = deliveries
    out = tmp_path / name
    assert main(["scan", str(path), "--out", str(out), "--quiet"]) == 2
    _, err = capsys.readouterr()
    assert_one_line_error(err, name, ".json")
    assert not out.exists()
    assert list(tmp_path.glob("*.part")) == []


def test_output_folder_missing_exits_2(deliveries, tmp_path, capsys):
    path, _ = deliveries
    out = tmp_path / "not_there" / "result.json"
    assert main(["scan", str(path), "--out", str(out), "--quiet"]) == 2
    _, err = capsys.readouterr()
    assert_one_line_error(err, "not_there")


# -- sheets --------------------------------------------------------------------------------------------------


@pytest.fixture
def workbook(tmp_path):
    path = tmp_path / "deliveries.xlsx"
    with pd.ExcelWriter(path) as writer:
        make_frame("deliveries", 30, seed=1).to_excel(writer, sheet_name="March", index=False)
        second = make_frame("deliveries", 40, seed=2)
        second["delivery"] = "A" + second["delivery"]
        second.to_excel(writer, sheet_name="April", index=False)
    return path, second


def test_sheet_selects_the_second_sheet(workbook, tmp_path, capsys):
    path, second = workbook
    out = tmp_path / "april.json"
    code = main(["scan", str(path), "--sheet", "April", "--id", "delivery", "--out", str(out), "--quiet"])
    assert code == 0, capsys.readouterr().err
    data = json.loads(out.read_text(encoding="utf-8"))
    assert data["run"]["input"]["sheet"] == "April"
    assert [r["key"] for r in data["records"]] == list(second["delivery"])


def test_first_sheet_by_default(workbook, tmp_path, capsys):
    path, _ = workbook
    out = tmp_path / "march.json"
    assert main(["scan", str(path), "--id", "delivery", "--out", str(out), "--quiet"]) == 0
    data = json.loads(out.read_text(encoding="utf-8"))
    assert data["run"]["input"]["sheet"] == "March"
    assert len(data["records"]) == 30


def test_unknown_sheet_exits_2(workbook, capsys):
    path, _ = workbook
    assert main(["scan", str(path), "--sheet", "May", "--quiet"]) == 2
    _, err = capsys.readouterr()
    assert_one_line_error(err, "deliveries.xlsx", "'May'", "March", "April")


# -- internal errors -----------------------------------------------------------------------------------------


def _broken_scan(*args, **kwargs):
    raise RuntimeError("simulated fault")


def test_internal_error_exits_1_with_one_line(deliveries, monkeypatch, capsys):
    path, _ = deliveries
    monkeypatch.delenv("INVESTIGATOR_DEBUG", raising=False)
    monkeypatch.setattr(investigator.pipeline.engine, "scan", _broken_scan)
    assert main(["scan", str(path), "--quiet"]) == 1
    _, err = capsys.readouterr()
    assert_one_line_error(err, "internal error", "RuntimeError", "simulated fault", "INVESTIGATOR_DEBUG")


def test_internal_error_traceback_on_request(deliveries, monkeypatch):
    path, _ = deliveries
    monkeypatch.setenv("INVESTIGATOR_DEBUG", "1")
    monkeypatch.setattr(investigator.pipeline.engine, "scan", _broken_scan)
    with pytest.raises(RuntimeError, match="simulated fault"):
        main(["scan", str(path), "--quiet"])


@pytest.mark.slow
def test_successful_scan_subprocess_exits_0(deliveries, tmp_path):
    path, _ = deliveries
    out = tmp_path / "result.json"
    done = run("scan", path, "--id", "delivery", "--out", out, "--quiet")
    assert done.returncode == 0, done.stderr
    assert "Traceback" not in done.stderr
    assert len(json.loads(out.read_text(encoding="utf-8"))["records"]) == N


def test_cells_scope_error_is_one_line(cli, tmp_path):
    path = tmp_path / "t.csv"
    pd.DataFrame({"a": np.arange(40.0), "b": np.arange(40.0) ** 1.5}).to_csv(path, index=False)
    code, _, err = cli("scan", path, "--cells", "some", "--quiet")
    assert code == 2
    assert_one_line_error(err, "--cells", "flagged, all", "some")


@pytest.mark.slow
def test_cells_all_fills_the_cells_column(cli, tmp_path):
    # A planted x100 slip in a product relation (fixtures/cells.py, invented order lines): with --cells all
    # every record has the column; the slip's line reads "amount x100?".
    from fixtures.cells import purchase_orders

    frame, planted = purchase_orders(n=1500, seed=2)
    path, out = tmp_path / "orders.csv", tmp_path / "out.csv"
    frame.to_csv(path, index=False)
    code, _, err = cli("scan", path, "--id", "line", "--cells", "all", "--quiet", "--out", out)
    assert code == 0, err
    written = pd.read_csv(out, keep_default_na=False)
    assert written["cells"][planted["x100"][0]].startswith("amount x100?")
