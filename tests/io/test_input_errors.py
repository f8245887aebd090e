"""Bad input gives a one-line InputError naming the file or column; odd but valid input loads correctly.

Every case runs twice: through the CLI (``investigator.cli.main.main``: exit code 2, exactly one line on stderr
that names what is wrong, no traceback) and through the API (``investigator.scan`` raises InputError).
All data is invented here with a fixed seed; every scan is a few dozen rows.
"""

from __future__ import annotations

import re
import zipfile

import numpy as np
import openpyxl
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from numpy.testing import assert_allclose

import investigator
from fixtures import BAD
from fixtures.tables import SHAPES, make_frame
from investigator import InputError
from investigator.cli.main import main

N = SHAPES["parts"].n  # records in the invented parts table


def write_csv(path, frame: pd.DataFrame, **kwargs):
    frame.to_csv(path, index=False, **kwargs)
    return path


def write_xlsx(path, header: list, rows: list[list], sheet: str = "data"):
    book = openpyxl.Workbook()
    ws = book.active
    ws.title = sheet
    ws.append(header)
    for row in rows:
        ws.append(row)
    book.save(path)
    return path


def xlsx_rows(frame: pd.DataFrame) -> list[list]:
    """The frame's rows with NaN as None, so openpyxl leaves those cells empty."""
    return [[None if isinstance(v, float) and np.isnan(v) else v for v in r] for r in frame.values.tolist()]


def cli_error(capsys, path, options: dict | None = None, extra: tuple = ()) -> str:
    """Run ``investigator scan`` in-process; assert the usage-error contract; return the stderr line."""
    args = ["scan", str(path), "--quiet", *extra]
    for key, value in (options or {}).items():
        args += [f"--{key}", str(value)]
    code = main(args)
    out, err = capsys.readouterr()
    assert code == 2, (code, out, err)
    assert "Traceback" not in err
    assert err.endswith("\n") and err.count("\n") == 1, f"stderr is not one line: {err!r}"
    assert err.startswith("investigator scan: error: ")
    return err


# -- the bad inputs ---------------------------------------------------------------------------------------
# Each builder writes its file into tmp_path and returns (path, options, words the message must contain). The
# cases that are simplest as files are in fixtures/bad (see the next section).


def _missing_file(tmp):
    return tmp / "nowhere.csv", {}, ["nowhere.csv", "no such file"]


def _folder(tmp):
    (tmp / "a_folder.csv").mkdir()
    return tmp / "a_folder.csv", {}, ["a_folder.csv", "folder"]


def _blank_lines(tmp):
    (tmp / "blank.csv").write_text("\n \n\n", encoding="utf-8")
    return tmp / "blank.csv", {}, ["blank.csv", "empty"]


def _one_row(tmp):
    (tmp / "one.csv").write_text("width,height,weight\n1.5,2.5,3.5\n", encoding="utf-8")
    return tmp / "one.csv", {}, ["one.csv", "1 data row"]


def _four_rows(tmp):
    return write_csv(tmp / "four.csv", make_frame("parts", 4)), {}, ["four.csv", "4 data rows"]


def _fewer_rows_than_features(tmp):
    rng = np.random.default_rng(3)
    frame = pd.DataFrame(rng.normal(size=(6, 8)).round(3), columns=[f"m{j}" for j in range(8)])
    return write_csv(tmp / "wide.csv", frame), {}, ["wide.csv", "6 rows but 8 features", "--exclude"]


def _only_text(tmp):
    rng = np.random.default_rng(4)
    words = ["valve", "gasket", "sensor", "bracket", "housing", "spring", "washer", "seal"]
    frame = pd.DataFrame({
        "code": [f"C{i:04d}" for i in range(N)],
        "comment": [" ".join(rng.choice(words, 5)) for _ in range(N)],
    })
    return write_csv(tmp / "words.csv", frame), {}, ["words.csv", "no usable feature", "--features"]


def _all_nan_named_in_features(tmp):
    frame = make_frame("parts").assign(blank=np.nan)
    path = write_csv(tmp / "blank_col.csv", frame)
    return path, {"features": "width,blank"}, ["blank_col.csv", "'blank'", "no values"]


def _duplicate_header_csv_spaces(tmp):
    lines = ["width, height,height "] + [f"{i},{i % 7},{i % 3}" for i in range(N)]
    (tmp / "dup_space.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return tmp / "dup_space.csv", {}, ["dup_space.csv", "'height'", "twice"]


def _duplicate_header_xlsx(tmp):
    rows = make_frame("parts")[["width", "height", "weight"]].values.tolist()
    path = write_xlsx(tmp / "dup.xlsx", ["width", "height", "width"], rows)
    return path, {}, ["dup.xlsx", "'width'", "twice"]


def _duplicate_header_parquet(tmp):
    rng = np.random.default_rng(5)
    cols = [pa.array(rng.normal(size=N)) for _ in range(3)]
    pq.write_table(pa.table(cols, names=["width", "height", "width"]), tmp / "dup.parquet")
    return tmp / "dup.parquet", {}, ["dup.parquet", "'width'", "twice"]


def _unknown_id(tmp):
    return write_csv(tmp / "parts.csv", make_frame("parts")), {"id": "serial"}, ["parts.csv", "'serial'", "part_id"]


def _unknown_feature(tmp):
    path = write_csv(tmp / "parts.csv", make_frame("parts"))
    return path, {"features": "width,depth"}, ["parts.csv", "--features", "'depth'"]


def _unknown_exclude(tmp):
    path = write_csv(tmp / "parts.csv", make_frame("parts"))
    return path, {"exclude": "colour"}, ["parts.csv", "--exclude", "'colour'"]


def _unknown_log(tmp):
    path = write_csv(tmp / "parts.csv", make_frame("parts"))
    return path, {"log": "width,depth"}, ["parts.csv", "--log", "'depth'"]


def _id_also_feature(tmp):
    path = write_csv(tmp / "parts.csv", make_frame("parts"))
    return path, {"id": "part_id", "features": "part_id,width"}, ["parts.csv", "'part_id'"]


def _corrupt_parquet(tmp):
    (tmp / "noise.parquet").write_bytes(np.random.default_rng(6).bytes(600))
    return tmp / "noise.parquet", {}, ["noise.parquet", "Parquet"]


def _truncated_parquet(tmp):
    make_frame("parts").to_parquet(tmp / "full.parquet")
    raw = (tmp / "full.parquet").read_bytes()
    (tmp / "cut.parquet").write_bytes(raw[: len(raw) // 2])
    return tmp / "cut.parquet", {}, ["cut.parquet", "Parquet"]


def _corrupt_xlsx(tmp):
    (tmp / "noise.xlsx").write_bytes(np.random.default_rng(8).bytes(600))
    return tmp / "noise.xlsx", {}, ["noise.xlsx", ".xlsx"]


def _truncated_xlsx(tmp):
    make_frame("parts").to_excel(tmp / "full.xlsx", index=False)
    raw = (tmp / "full.xlsx").read_bytes()
    (tmp / "cut.xlsx").write_bytes(raw[: len(raw) // 2])
    return tmp / "cut.xlsx", {}, ["cut.xlsx", ".xlsx"]


def _xlsx_with_damaged_part(tmp, part: str):
    """A real workbook whose zip is intact but one XML part is cut in half."""
    make_frame("parts").to_excel(tmp / "full.xlsx", index=False)
    name = f"damaged_{part.split('/')[-1].split('.')[0]}.xlsx"
    with zipfile.ZipFile(tmp / "full.xlsx") as zin, zipfile.ZipFile(tmp / name, "w") as zout:
        for item in zin.infolist():
            data = zin.read(item.filename)
            if item.filename == part:
                data = data[: len(data) // 2]
            zout.writestr(item, data)
    return tmp / name, {}, [name, ".xlsx"]


def _xlsx_damaged_sheet(tmp):
    return _xlsx_with_damaged_part(tmp, "xl/worksheets/sheet1.xml")


def _xlsx_damaged_workbook(tmp):
    return _xlsx_with_damaged_part(tmp, "xl/workbook.xml")


def _zip_not_xlsx(tmp):
    with zipfile.ZipFile(tmp / "archive.xlsx", "w") as z:
        z.writestr("readme.txt", "not a workbook")
    return tmp / "archive.xlsx", {}, ["archive.xlsx", ".xlsx"]


def _old_xls(tmp):
    (tmp / "old.xls").write_bytes(b"\xd0\xcf\x11\xe0" + bytes(200))
    return tmp / "old.xls", {}, ["old.xls", ".xlsx"]


def _duplicate_key(tmp):
    frame = make_frame("parts")
    frame.loc[9, "part_id"] = frame.loc[2, "part_id"]
    path = write_csv(tmp / "parts.csv", frame)
    return path, {"id": "part_id"}, ["parts.csv", "'part_id'", "P-002", "rows 3, 10", "unique"]


def _duplicate_numeric_key(tmp):
    frame = make_frame("parts").assign(part_id=np.arange(1000, 1000 + N))
    frame.loc[30, "part_id"] = 1004
    frame.to_parquet(tmp / "parts.parquet")
    return tmp / "parts.parquet", {"id": "part_id"}, ["parts.parquet", "'part_id'", "1004", "unique"]


def _empty_key(tmp):
    frame = make_frame("parts")
    frame.loc[6, "part_id"] = None
    path = write_csv(tmp / "parts.csv", frame)
    return path, {"id": "part_id"}, ["parts.csv", "'part_id'", "row 7"]


def _empty_key_xlsx(tmp):
    frame = make_frame("parts")
    rows = frame.values.tolist()
    rows[11][0] = None
    path = write_xlsx(tmp / "parts.xlsx", list(frame.columns), rows)
    return path, {"id": "part_id"}, ["parts.xlsx", "'part_id'", "row 12"]


def _sheet_on_csv(tmp):
    return write_csv(tmp / "parts.csv", make_frame("parts")), {"sheet": "data"}, ["parts.csv", "--sheet"]


def _unknown_sheet(tmp):
    frame = make_frame("parts")
    path = write_xlsx(tmp / "book.xlsx", list(frame.columns), frame.values.tolist(), sheet="measurements")
    return path, {"sheet": "summary"}, ["book.xlsx", "'summary'", "measurements"]


def _line_break_in_header(tmp):
    """Spreadsheet headers often hold a line break; the message must still be one line."""
    frame = make_frame("parts").rename(columns={"weight": "weight\n(kg)"})
    path = write_csv(tmp / "wrapped.csv", frame)
    return path, {"id": "serial"}, ["wrapped.csv", "'serial'", "weight\\n(kg)"]


def _line_break_in_duplicate_xlsx(tmp):
    rows = make_frame("parts")[["width", "height", "weight"]].values.tolist()
    path = write_xlsx(tmp / "wrapped.xlsx", ["mass\n(kg)", "height", "mass\n(kg)"], rows)
    return path, {}, ["wrapped.xlsx", "twice"]


def _bad_cutoff(tmp):
    return write_csv(tmp / "parts.csv", make_frame("parts")), {"cutoff": 2}, ["--cutoff", "2"]


def _bad_contamination(tmp):
    return write_csv(tmp / "parts.csv", make_frame("parts")), {"contamination": 0.9}, ["--contamination", "0.9"]


def _zero_contamination(tmp):
    return write_csv(tmp / "parts.csv", make_frame("parts")), {"contamination": 0}, ["--contamination"]


def _bad_method(tmp):
    return write_csv(tmp / "parts.csv", make_frame("parts")), {"methods": "nope"}, ["--methods", "'nope'"]


def _bad_seed(tmp):
    return write_csv(tmp / "parts.csv", make_frame("parts")), {"seed": -1}, ["--seed", "-1"]


def _empty_features(tmp):
    return write_csv(tmp / "parts.csv", make_frame("parts")), {"features": ","}, ["--features", "empty"]


CASES = {
    "missing file": _missing_file,
    "a folder": _folder,
    "only blank lines": _blank_lines,
    "one row": _one_row,
    "four rows": _four_rows,
    "fewer rows than features": _fewer_rows_than_features,
    "only text and identifiers": _only_text,
    "all-NaN column named in --features": _all_nan_named_in_features,
    "duplicate header csv after spaces": _duplicate_header_csv_spaces,
    "duplicate header xlsx": _duplicate_header_xlsx,
    "duplicate header parquet": _duplicate_header_parquet,
    "unknown --id": _unknown_id,
    "unknown --features": _unknown_feature,
    "unknown --exclude": _unknown_exclude,
    "unknown --log": _unknown_log,
    "--id also in --features": _id_also_feature,
    "random bytes parquet": _corrupt_parquet,
    "truncated parquet": _truncated_parquet,
    "random bytes xlsx": _corrupt_xlsx,
    "truncated xlsx": _truncated_xlsx,
    "xlsx with a damaged sheet": _xlsx_damaged_sheet,
    "xlsx with a damaged workbook part": _xlsx_damaged_workbook,
    "zip that is not a workbook": _zip_not_xlsx,
    "old xls": _old_xls,
    "duplicate key": _duplicate_key,
    "duplicate numeric key": _duplicate_numeric_key,
    "empty key csv": _empty_key,
    "empty key xlsx": _empty_key_xlsx,
    "--sheet on csv": _sheet_on_csv,
    "unknown sheet": _unknown_sheet,
    "line break in a header": _line_break_in_header,
    "line break in a duplicate xlsx header": _line_break_in_duplicate_xlsx,
    "--cutoff 2": _bad_cutoff,
    "--contamination 0.9": _bad_contamination,
    "--contamination 0": _zero_contamination,
    "--methods nope": _bad_method,
    "--seed -1": _bad_seed,
    "empty --features": _empty_features,
}


@pytest.mark.parametrize("case", list(CASES))
def test_bad_input_cli_exit_2_one_line(case, tmp_path, capsys):
    path, options, words = CASES[case](tmp_path)
    err = cli_error(capsys, path, options)
    for word in words:
        assert word in err, f"{word!r} missing from {err!r}"


@pytest.mark.parametrize("case", list(CASES))
def test_bad_input_api_raises_input_error(case, tmp_path):
    path, options, words = CASES[case](tmp_path)
    with pytest.raises(InputError) as info:
        investigator.scan(path, **options)
    message = str(info.value)
    assert "\n" not in message
    first = words[0]
    if first.startswith("--"):  # the API names its parameter as the API spells it: `cutoff`, not --cutoff
        first = f"`{first[2:]}`"
    assert first in message and "--" not in message


def test_bad_input_through_path_string(tmp_path):
    """The API takes a path as text as well as a Path."""
    (tmp_path / "empty.csv").write_bytes(b"")
    with pytest.raises(InputError, match="empty.csv"):
        investigator.scan(str(tmp_path / "empty.csv"))


def test_input_error_is_not_an_internal_error():
    # The CLI maps InputError to 2 and everything else to 1, so it must stay a distinct class.
    assert issubclass(InputError, ValueError)
    assert InputError is not ValueError


# -- the bad files in fixtures/bad ---------------------------------------------------------------------------
# fixtures/bad/README.md has one line per file: what is wrong with it and the words the error must contain.


def _bad_files() -> dict[str, list[str]]:
    lines = (BAD / "README.md").read_text(encoding="utf-8").splitlines()
    entries = [re.match(r"- `([^`]+)`: .* Must say: (.*)$", line) for line in lines if line.startswith("- `")]
    return {m[1]: re.findall(r'"([^"]+)"', m[2]) for m in entries if m}


BAD_FILES = _bad_files()


def test_every_bad_file_is_described_once():
    on_disk = sorted(p.name for p in BAD.iterdir() if p.name != "README.md")
    assert sorted(BAD_FILES) == on_disk
    assert all(len(words) >= 2 for words in BAD_FILES.values()), BAD_FILES


@pytest.mark.parametrize("name", list(BAD_FILES))
def test_a_bad_file_gives_the_error_its_readme_line_names(name, capsys):
    err = cli_error(capsys, BAD / name)
    for word in BAD_FILES[name]:
        assert word in err, f"{word!r} missing from {err!r}"
    with pytest.raises(InputError) as info:
        investigator.scan(BAD / name)
    assert "\n" not in str(info.value) and all(word in str(info.value) for word in BAD_FILES[name])


# -- data frames through the API ----------------------------------------------------------------------------


def test_frame_with_duplicate_column_names():
    frame = make_frame("parts")[["width", "height", "weight"]]
    frame.columns = ["width", "height", "width"]
    with pytest.raises(InputError, match="'width' appears twice"):
        investigator.scan(frame)


@pytest.mark.parametrize("rows", [0, 1, 4])
def test_frame_with_too_few_rows(rows):
    with pytest.raises(InputError, match="data frame"):
        investigator.scan(make_frame("parts", rows + 1).iloc[:rows])


def test_frame_without_columns():
    with pytest.raises(InputError, match="no columns"):
        investigator.scan(pd.DataFrame(index=range(10)))


def test_frame_unknown_id():
    with pytest.raises(InputError, match="'serial' not found"):
        investigator.scan(make_frame("parts"), id="serial")


# -- survivable oddities -------------------------------------------------------------------------------------


def _roles(result) -> dict[str, str]:
    return {c.name: c.role for c in result.run.columns}


@pytest.mark.parametrize("fmt", ["csv", "xlsx", "parquet"])
def test_all_nan_column_is_left_out_as_empty(fmt, tmp_path):
    frame = make_frame("parts").assign(blank=np.nan)
    path = tmp_path / f"parts.{fmt}"
    if fmt == "csv":
        write_csv(path, frame)
    elif fmt == "parquet":
        frame.to_parquet(path)
    else:
        write_xlsx(path, list(frame.columns), xlsx_rows(frame))
    result = investigator.scan(path, id="part_id")
    assert _roles(result)["blank"] == "empty"
    assert "blank" not in result.features.names
    assert set(result.features.names) == {"width", "height", "weight", "batch"}
    assert np.isfinite(result.consensus).all()


def test_all_infinite_column_is_left_out_as_empty():
    frame = make_frame("parts").assign(overflow=np.inf)
    result = investigator.scan(frame, id="part_id")
    assert _roles(result)["overflow"] == "empty"
    assert "overflow" not in result.features.names
    with pytest.raises(InputError, match="'overflow'"):
        investigator.scan(frame, id="part_id", features="width,overflow")


@pytest.mark.parametrize("fmt", ["csv", "parquet", "frame"])
def test_infinite_values_are_missing_with_a_notice(fmt, tmp_path):
    frame = make_frame("parts")
    frame.loc[4, "width"] = np.inf
    frame.loc[17, "width"] = -np.inf
    if fmt == "csv":
        data = write_csv(tmp_path / "parts.csv", frame)
        assert "inf" in data.read_text(encoding="utf-8")
    elif fmt == "parquet":
        data = tmp_path / "parts.parquet"
        frame.to_parquet(data)
    else:
        data = frame
    result = investigator.scan(data, id="part_id")
    notices = result.run.notices
    assert any("'width'" in n and "infinite" in n and "row 5" in n for n in notices), notices
    records = result.records()
    assert records[4]["imputed"] == ["width"]
    assert records[17]["imputed"] == ["width"]
    assert all(r["imputed"] == [] for i, r in enumerate(records) if i not in (4, 17))
    assert _roles(result)["width"] == "numeric"
    for key in result.method_results:
        assert np.isfinite(result.scores(key)).all(), key


# -- encodings and delimiters --------------------------------------------------------------------------------


def _scores(data, **options):
    result = investigator.scan(data, id="part_id", log="none", **options)
    return result, {k: result.scores(k) for k in result.method_results}


@pytest.mark.slow
def test_semicolon_delimiter_same_as_comma(tmp_path):
    frame = make_frame("parts")
    _, expected = _scores(write_csv(tmp_path / "comma.csv", frame))
    result, got = _scores(write_csv(tmp_path / "semi.csv", frame, sep=";"))
    assert result.run.input.delimiter == ";"
    assert list(result.table.frame.columns) == list(frame.columns)
    for key in expected:
        assert_allclose(got[key], expected[key], rtol=1e-12, err_msg=key)


@pytest.mark.parametrize("suffix", [".tsv", ".txt"])
def test_tab_delimited(tmp_path, suffix):
    frame = make_frame("parts")
    result = investigator.scan(write_csv(tmp_path / f"parts{suffix}", frame, sep="\t"), id="part_id")
    assert result.run.input.delimiter == "\t"
    assert list(result.table.frame.columns) == list(frame.columns)
    assert result.keys == list(frame["part_id"])


def test_utf8_bom_is_not_part_of_the_first_name(tmp_path):
    frame = make_frame("parts")
    path = write_csv(tmp_path / "bom.csv", frame, encoding="utf-8-sig")
    assert path.read_bytes().startswith(b"\xef\xbb\xbf")
    result = investigator.scan(path, id="part_id")  # the key is the first column
    assert result.table.frame.columns[0] == "part_id"
    assert result.run.input.encoding == "utf-8-sig"
    assert result.keys[:2] == ["P-000", "P-001"]


def test_cp1252_file_loads_with_an_encoding_notice(tmp_path):
    frame = make_frame("parts")
    frame["batch"] = np.where(np.arange(N) % 3 == 0, "Café Süd", "Nord")
    path = write_csv(tmp_path / "windows.csv", frame, encoding="cp1252")
    raw = path.read_bytes()
    with pytest.raises(UnicodeDecodeError):
        raw.decode("utf-8")
    result = investigator.scan(path, id="part_id")
    assert any("cp1252" in n for n in result.run.notices), result.run.notices
    assert result.run.input.encoding == "cp1252"
    assert set(result.table.frame["batch"]) == {"Café Süd", "Nord"}


def test_utf8_file_has_no_encoding_notice(tmp_path):
    frame = make_frame("parts")
    frame["batch"] = np.where(np.arange(N) % 3 == 0, "Café Süd", "Nord")
    result = investigator.scan(write_csv(tmp_path / "utf8.csv", frame, encoding="utf-8"), id="part_id")
    assert not any("UTF-8" in n for n in result.run.notices)
    assert set(result.table.frame["batch"]) == {"Café Süd", "Nord"}


def test_key_values_keep_leading_zeros(tmp_path):
    frame = make_frame("parts").assign(part_id=[f"{i:04d}" for i in range(N)])
    result = investigator.scan(write_csv(tmp_path / "zeros.csv", frame), id="part_id")
    assert result.keys[:3] == ["0000", "0001", "0002"]


# -- other formats give the same scores as the CSV of the same data ------------------------------------------


def _frame_with_a_gap() -> pd.DataFrame:
    frame = make_frame("parts", 60, seed=11)
    frame.loc[[5, 33], "height"] = np.nan
    frame.loc[50, "width"] = 31.5  # a clear outlier, so the scores are not all alike
    return frame


@pytest.mark.slow
def test_parquet_round_trip_same_scores(tmp_path):
    frame = _frame_with_a_gap()
    _, expected = _scores(write_csv(tmp_path / "parts.csv", frame))
    frame.to_parquet(tmp_path / "parts.parquet", index=False)
    result, got = _scores(tmp_path / "parts.parquet")
    assert result.run.input.format == "parquet"
    assert result.keys == list(frame["part_id"])
    assert set(expected) == set(got) and "robust_distance" in got
    for key in expected:
        assert_allclose(got[key], expected[key], rtol=1e-10, err_msg=key)


@pytest.mark.slow
def test_xlsx_round_trip_same_scores(tmp_path):
    frame = _frame_with_a_gap()
    _, expected = _scores(write_csv(tmp_path / "parts.csv", frame))
    path = write_xlsx(tmp_path / "parts.xlsx", list(frame.columns), xlsx_rows(frame))
    result, got = _scores(path)
    assert result.run.input.format == "xlsx"
    assert result.records()[5]["imputed"] == ["height"]
    for key in expected:
        assert_allclose(got[key], expected[key], rtol=1e-10, err_msg=key)


@pytest.mark.slow
def test_xlsx_written_by_pandas_same_scores(tmp_path):
    frame = _frame_with_a_gap()
    _, expected = _scores(write_csv(tmp_path / "parts.csv", frame))
    frame.to_excel(tmp_path / "parts.xlsx", index=False)
    _, got = _scores(tmp_path / "parts.xlsx")
    assert_allclose(got["robust_distance"], expected["robust_distance"], rtol=1e-10)


@pytest.mark.slow
def test_second_sheet_is_read_when_named(tmp_path):
    first, second = make_frame("parts", 30, seed=1), make_frame("parts", 45, seed=2)
    path = tmp_path / "book.xlsx"
    with pd.ExcelWriter(path) as writer:
        first.to_excel(writer, sheet_name="old", index=False)
        second.assign(part_id="S" + second["part_id"]).to_excel(writer, sheet_name="new", index=False)
    default = investigator.scan(path, id="part_id")
    assert default.n_records == 30 and default.run.input.sheet == "old"
    chosen = investigator.scan(path, id="part_id", sheet="new")
    assert chosen.n_records == 45 and chosen.run.input.sheet == "new"
    assert chosen.keys[0] == "SP-000"


def test_trailing_empty_columns_of_a_spreadsheet_export(tmp_path):
    """'a,b,c,,' headers (blank trailing cells) are empty columns, not duplicate names."""
    frame = make_frame("parts")
    lines = [",".join(frame.columns) + ",,"] + [",".join(map(str, r)) + ",," for r in frame.values.tolist()]
    (tmp_path / "export.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    result = investigator.scan(tmp_path / "export.csv", id="part_id")
    roles = _roles(result)
    assert roles["Unnamed: 5"] == roles["Unnamed: 6"] == "empty"
    assert set(result.features.names) == {"width", "height", "weight", "batch"}


@pytest.mark.slow
def test_blank_header_cell_named_alike_in_csv_and_xlsx(tmp_path):
    frame = make_frame("parts")
    header = ["part_id", "width", "", "weight", "batch"]
    lines = [",".join(header)] + [",".join(map(str, r)) for r in frame.values.tolist()]
    (tmp_path / "blank.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    write_xlsx(tmp_path / "blank.xlsx", header, frame.values.tolist())
    from_csv = investigator.scan(tmp_path / "blank.csv", id="part_id", log="none")
    from_xlsx = investigator.scan(tmp_path / "blank.xlsx", id="part_id", log="none")
    assert list(from_csv.table.frame.columns) == list(from_xlsx.table.frame.columns)
    assert "Unnamed: 2" in from_xlsx.features.names
    assert_allclose(from_xlsx.scores("robust_distance"), from_csv.scores("robust_distance"), rtol=1e-10)


def test_frame_with_object_cells_is_read_as_text():
    rng = np.random.default_rng(21)
    frame = pd.DataFrame({"x": rng.normal(size=40), "y": rng.normal(size=40),
                          "tags": [{"k": 1}] * 20 + [[1, 2]] * 20})
    result = investigator.scan(frame)
    roles = {c.name: c.role for c in result.columns}
    assert roles["tags"] == "categorical"
    assert np.all(np.isfinite(result.consensus))


def test_error_naming_a_column_with_a_line_break_stays_on_one_line(tmp_path, capsys):
    path = tmp_path / "breaks.csv"
    pd.DataFrame({"a\nb": range(10), "c": range(10)}).to_csv(path, index=False)
    assert main(["scan", str(path), "--log", "a\nb"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err


def test_records_alike_once_prepared_are_one_line(tmp_path, capsys):
    # Two categories whose levels are equally common: every level's rarity is 0, so every record is the same
    # point to the methods (found by the property test; it was an internal error, exit 1).
    path = tmp_path / "alike.csv"
    path.write_text("c,d\n" + "a,x\nb,y\n" * 10)
    assert main(["scan", str(path), "--quiet"]) == 2
    err = capsys.readouterr().err.strip()
    assert "every record is alike on the features as prepared (c, d;" in err and "\n" not in err
