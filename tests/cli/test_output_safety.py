"""Outputs never replace an input, and are written whole or not at all (issue: messy and hostile input).

Each command that writes a file is given one of its own inputs as the output: the data file itself, the
same file through a symbolic link and a hard link (same device and inode: POSIX ``link(2)``, Python's
``os.path.samefile``), the reference, the limits file and the review store. Each must be refused with exit 2
and one line naming the file, before the scan runs (the engine is replaced by a function that fails the
test if called) and with the data byte for byte as it was (sha256).

The data is the invented deliveries table of ``fixtures.tables``.
"""

from __future__ import annotations

import errno
import hashlib
import os
from pathlib import Path

import pandas as pd
import pytest

import investigator.pipeline.engine
from fixtures.cli import assert_one_line_error
from fixtures.tables import make_frame
from investigator.review.store import default_store_path


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture
def data(csv_of):
    return csv_of("deliveries")


@pytest.fixture
def no_work(monkeypatch):
    """The scan and the check fail the test if a command reaches them: a refusal must come first."""
    def called(*args, **kwargs):
        raise AssertionError("the scan ran before the output path was refused")

    for name in ("scan", "check"):
        monkeypatch.setattr(investigator.pipeline.engine, name, called)


def link(data: Path, how: str, suffix: str) -> Path:
    """``data`` itself, or a new symbolic or hard link to it named with ``suffix``."""
    if how == "itself":
        return data
    other = data.with_name(f"{how}{suffix}")
    if how == "symlink":
        other.symlink_to(data.name)
    else:
        os.link(data, other)
    return other


def refused(cli, data: Path, out: Path, *args) -> str:
    before = digest(data)
    code, _, err = cli(*args)
    assert code == 2, err
    assert_one_line_error(err, str(out), "give another")
    assert digest(data) == before  # the data is untouched, byte for byte
    assert not list(data.parent.glob("*.part"))
    return err


@pytest.mark.parametrize("how", ["itself", "symlink", "hardlink"])
@pytest.mark.parametrize("command, flag, suffix", [
    ("scan", "--out", ".csv"), ("check", "--out", ".csv"), ("report", "--out", ".csv"),
    ("map", "--out", ".png"), ("verdicts", "--export", ".csv"),
])
def test_no_command_writes_over_the_data(cli, data, no_work, tmp_path, command, flag, suffix, how):
    if suffix != ".csv":  # the data must carry the output's extension to be a candidate at all
        data = data.rename(data.with_suffix(suffix))
    out = link(data, how, suffix)
    extra = ["--reference", str(data)] if command == "check" else []
    err = refused(cli, data, out, command, data, *extra, flag, out)
    assert "is the data file" in err or (command == "check" and "is the reference file" in err)


def test_scan_refuses_a_parquet_data_file(cli, data, no_work):
    other = data.with_suffix(".parquet")
    pd.read_csv(data).to_parquet(other)
    refused(cli, other, other, "scan", other, "--out", other)


def test_report_refuses_a_spreadsheet_data_file(cli, data, no_work):
    book = data.with_suffix(".xlsx")
    pd.read_csv(data).to_excel(book, index=False)
    refused(cli, book, book, "report", book, "--out", book)


def test_check_refuses_the_reference_as_output(cli, data, no_work, tmp_path):
    reference = tmp_path / "ref.csv"
    reference.write_bytes(data.read_bytes())
    err = refused(cli, reference, reference, "check", data, "--reference", reference, "--out", reference)
    assert "reference file" in err


def test_limits_file_is_never_an_output(cli, data, no_work, tmp_path):
    limits = tmp_path / "limits.csv"
    limits.write_text("column,lower,upper\ndistance,0,100\n")
    err = refused(cli, limits, limits, "scan", data, "--limits", limits, "--out", limits)
    assert "limits file" in err


def test_the_review_store_is_never_an_output(cli, data, no_work, tmp_path):
    store = tmp_path / "store.csv"  # a store given by name, with an output's extension
    code, _, err = cli("verdict", data, "--row", "1", "--set", "benign", "--store", store)
    assert code == 0, err
    before = digest(store)
    for args in (["scan", data, "--store", store, "--out", store],
                 ["report", data, "--store", store, "--out", store],
                 ["verdicts", data, "--store", store, "--export", store]):
        code, _, err = cli(*args)
        assert code == 2, err
        assert_one_line_error(err, "review store", str(store))
        assert digest(store) == before


def test_the_default_store_beside_the_data_is_never_an_output(cli, data, no_work):
    # The store's name ends in .sqlite, which no writer takes; a report's .csv name cannot be one: so the
    # default store is checked by file identity (a hard link named .csv).
    code, _, err = cli("verdict", data, "--row", "1", "--set", "benign")
    assert code == 0, err
    store = default_store_path(data)
    alias = data.with_name("alias.csv")
    os.link(store, alias)
    code, _, err = cli("report", data, "--out", alias)
    assert code == 2
    assert_one_line_error(err, "review store")


def test_the_part_name_of_an_output_is_not_the_data(cli, tmp_path, no_work):
    # Writing x.csv goes through x.csv.part first: a data file of that name would be overwritten by it.
    data = tmp_path / "x.csv.part"
    make_frame("deliveries").to_csv(data, index=False)
    code, _, err = cli("verdicts", data, "--export", tmp_path / "x.csv")
    assert code == 2
    assert_one_line_error(err, "data file")


def test_dask_results_folder_never_holds_the_data(cli, tmp_path, no_work):
    folder = tmp_path / "sales"
    folder.mkdir()
    frame = make_frame("deliveries")
    frame.iloc[:30].to_parquet(folder / "part.0.parquet")
    frame.iloc[30:].to_parquet(folder / "part.1.parquet")
    before = {p.name: digest(p) for p in folder.iterdir()}
    for data, out in ((folder, folder), (folder / "part.0.parquet", tmp_path), (f"{folder}/*.parquet", folder),
                      (folder, folder / "results")):
        code, _, err = cli("scan", data, "--engine", "dask", "--out", out)
        assert code == 2, err
        assert_one_line_error(err, str(out))
    assert {p.name: digest(p) for p in folder.iterdir()} == before


def test_scan_dataset_api_refuses_a_folder_holding_the_data(tmp_path):
    from investigator import InputError
    from investigator.pipeline.dask_engine import scan_dataset

    frame = make_frame("deliveries")
    frame.to_parquet(tmp_path / "part.0.parquet")
    (tmp_path / "_run.json").write_text("{}")  # looks like an earlier results folder, so only the new check bars it
    with pytest.raises(InputError, match="holds the data file"):
        scan_dataset(tmp_path / "part.0.parquet", out=tmp_path, client=object())
    assert (tmp_path / "part.0.parquet").exists()


def test_api_write_refuses_the_data(data):
    import investigator
    from investigator import InputError

    result = investigator.scan(data, id="delivery")
    before = digest(data)
    with pytest.raises(InputError, match="`path`"):
        result.write(data)
    assert digest(data) == before


# -- written whole or not at all -----------------------------------------------------------------------------


def full_disk_after(nbytes: int):
    """A write that puts ``nbytes`` on disk and then fails as a full disk does: ENOSPC (POSIX write(2))."""
    def write(path, *args, **kwargs):
        Path(path).write_bytes(b"x" * nbytes)
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
    return write


@pytest.fixture
def earlier(tmp_path):
    """An earlier output of the same name, which a failed write must leave as it was."""
    def make(name: str) -> tuple[Path, str]:
        path = tmp_path / name
        path.write_bytes(b"the earlier output\n")
        return path, digest(path)
    return make


def test_full_disk_during_scan_output_keeps_the_earlier_one(cli, data, earlier, monkeypatch):
    out, before = earlier("result.csv")
    monkeypatch.setattr(pd.DataFrame, "to_csv", lambda self, path, **kw: full_disk_after(100)(path))
    code, _, err = cli("scan", data, "--out", out, "--quiet")
    assert code == 2
    assert_one_line_error(err, f"cannot write {out}: no space left on device")
    assert digest(out) == before
    assert not out.with_name("result.csv.part").exists()


def test_full_disk_during_map_leaves_no_empty_png(cli, data, earlier, monkeypatch):
    from matplotlib.figure import Figure

    out, before = earlier("m.png")
    monkeypatch.setattr(Figure, "savefig", lambda self, path, **kw: full_disk_after(0)(path))
    code, _, err = cli("map", data, "--map", "pca", "--out", out)
    assert code == 2
    assert_one_line_error(err, f"cannot write {out}: no space left on device", "--out")
    assert digest(out) == before
    assert not out.with_name("m.png.part").exists()


def test_full_disk_during_report_and_export(cli, data, earlier, monkeypatch):
    report, report_before = earlier("report.html")
    export, export_before = earlier("verdicts.json")
    assert cli("verdict", data, "--row", "2", "--set", "benign")[0] == 0
    monkeypatch.setattr(Path, "write_text", lambda self, *a, **kw: full_disk_after(10)(self))
    for args, out in ((["report", data, "--out", report], report), (["verdicts", data, "--export", export], export)):
        code, _, err = cli(*args)
        assert code == 2
        assert_one_line_error(err, f"cannot write {out}: no space left on device")
        assert not out.with_name(out.name + ".part").exists()
    assert (digest(report), digest(export)) == (report_before, export_before)


def test_permission_error_is_one_line(cli, data, monkeypatch, tmp_path):
    from matplotlib.figure import Figure

    def refuse(self, path, **kwargs):
        raise PermissionError(errno.EACCES, os.strerror(errno.EACCES), str(path))

    monkeypatch.setattr(Figure, "savefig", refuse)
    code, _, err = cli("map", data, "--map", "pca", "--out", tmp_path / "m.png")
    assert code == 2
    assert_one_line_error(err, "permission denied: choose another folder")


@pytest.mark.skipif(os.geteuid() == 0, reason="root ignores file permissions (POSIX access(2)), so the "
                    "folder would be writable")
def test_read_only_folder_is_one_line(cli, data, tmp_path):
    folder = tmp_path / "locked"
    folder.mkdir()
    folder.chmod(0o555)
    try:
        code, _, err = cli("scan", data, "--out", folder / "r.json", "--quiet")
    finally:
        folder.chmod(0o755)
    assert code == 2
    assert_one_line_error(err, "permission denied: choose another folder")
    assert list(folder.iterdir()) == []


def test_leftover_part_from_a_killed_run_is_replaced(cli, data, tmp_path):
    out = tmp_path / "result.json"
    (tmp_path / "result.json.part").write_bytes(b'{"half": ')  # what a killed run leaves
    code, _, err = cli("scan", data, "--out", out, "--quiet")
    assert code == 0, err
    assert not (tmp_path / "result.json.part").exists()
    assert out.read_text(encoding="utf-8").startswith("{")
