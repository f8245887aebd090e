"""The Dask path: same numbers as in memory, a memory budget per worker, the command line and its errors.

Reference for "same numbers": the in-memory scan of the same records (when the fit sample is the whole
dataset, the fitted models are the in-memory scan's), and :class:`ScanModel` applied in memory to the same
sample (when it is not). The clusters are small LocalClusters of two single-threaded worker processes.
"""

from __future__ import annotations

import json
import logging
import os

import numpy as np
import pandas as pd
import pytest

import investigator
from fixtures.planted import planted_outliers
from investigator.cli.main import main
from investigator.io.tables import Source, Table, load_table
from investigator.pipeline.dask_engine import RUN_FILE, draw_sample, scan_dataset
from investigator.pipeline.options import ScanOptions
from investigator.pipeline.scan_model import ScanModel

distributed = pytest.importorskip("distributed")
pytestmark = pytest.mark.slow  # the whole module: every test starts or uses a local Dask cluster


@pytest.fixture(scope="module")
def client():
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                       dashboard_address="127.0.0.1:0", silence_logs=logging.ERROR)
    with distributed.Client(cluster) as c:
        yield c
    cluster.close()


def _write_parts(folder, frame, n_parts):
    folder.mkdir()
    for i, rows in enumerate(np.array_split(np.arange(len(frame)), n_parts)):
        frame.iloc[rows].to_parquet(folder / f"part.{i}.parquet", index=False)
    return folder


def _read(folder) -> pd.DataFrame:
    return pd.read_parquet(folder).sort_values("row").reset_index(drop=True)


def _assert_same_records(expected: pd.DataFrame, got: pd.DataFrame, methods) -> None:
    assert len(got) == len(expected)
    np.testing.assert_array_equal(got["row"], expected["row"])
    assert list(got["key"].astype(str)) == list(expected["key"].astype(str))
    np.testing.assert_array_equal(got["flagged"], expected["flagged"])
    np.testing.assert_array_equal(got["votes"], expected["votes"])
    np.testing.assert_allclose(got["consensus"], expected["consensus"], rtol=0, atol=1e-9)
    for key in methods:
        np.testing.assert_array_equal(got[f"flag_{key}"], expected[f"flag_{key}"], err_msg=key)
        np.testing.assert_allclose(got[f"score_{key}"], expected[f"score_{key}"], rtol=1e-9, atol=1e-9, err_msg=key)
    assert list(got["top_features"]) == list(expected["top_features"])
    assert list(got["column_hits"]) == list(expected["column_hits"])


def test_dask_equals_in_memory_on_50k_rows_in_8_partitions(tmp_path, client):
    frame, _ = planted_outliers(50_000, 8, seed=12)
    data = _write_parts(tmp_path / "ds", frame, 8)
    result = scan_dataset(data, ScanOptions(), out=tmp_path / "out", client=client)
    memory = investigator.scan(data)
    _assert_same_records(memory.to_frame(), _read(tmp_path / "out"), memory.method_results)
    assert result.run.flagged == int(memory.flagged.sum())
    assert result.run.input.rows == 50_000 and result.run.fit.sample == 50_000
    # One file per partition under our own name (docs/large.md), and the run record that Parquet readers skip.
    assert sorted(os.listdir(tmp_path / "out")) == ["_run.json", *(f"scores-{i:05d}.parquet" for i in range(8))]


def test_dask_equals_in_memory_with_a_key_categories_gaps_and_contamination(tmp_path, client):
    frame, _ = planted_outliers(3_000, 4, seed=13, share=0.02)
    rng = np.random.default_rng(13)
    frame.insert(0, "claim", [f"C-{i:05d}" for i in range(3_000)])
    frame["site"] = rng.choice(["north", "south", "east", "rare"], size=3_000, p=[0.4, 0.4, 0.19, 0.01])
    frame.loc[rng.choice(3_000, 40, replace=False), "f1"] = np.nan
    data = _write_parts(tmp_path / "ds", frame, 5)
    frame.iloc[:0].to_parquet(data / "part.5.parquet", index=False)  # an empty file: a partition of no records
    options = ScanOptions(id="claim", contamination=0.02)
    scan_dataset(data, options, out=tmp_path / "out", client=client)
    memory = investigator.scan(data, options=options)
    _assert_same_records(memory.to_frame(), _read(tmp_path / "out"), memory.method_results)
    assert int(memory.flagged.sum()) == 60


def test_dask_results_carry_the_chosen_input_columns(tmp_path, client):
    frame, _ = planted_outliers(2_000, 4, seed=15)
    frame.insert(0, "rank", np.arange(2_000) % 7)  # named like a result column: input.rank
    frame["memo"] = np.where(np.arange(2_000) % 5 == 0, "=SUM(A1:A9)", "ok")
    data = _write_parts(tmp_path / "ds", frame, 4)
    scan_dataset(data, out=tmp_path / "all", client=client)
    got = _read(tmp_path / "all")
    assert list(got.columns[-len(frame.columns):]) == ["input.rank", *frame.columns[1:]]
    np.testing.assert_array_equal(got["input.rank"], frame["rank"])
    assert got["memo"].tolist() == frame["memo"].tolist()  # Parquet keeps the text as it is
    scan_dataset(data, out=tmp_path / "some", client=client, columns=("memo", "f1"))
    assert list(_read(tmp_path / "some").columns[-2:]) == ["memo", "f1"]
    scan_dataset(data, out=tmp_path / "none", client=client, columns=())
    assert "memo" not in _read(tmp_path / "none").columns
    with pytest.raises(investigator.InputError, match="no column 'memoo'"):
        scan_dataset(data, out=tmp_path / "bad", client=client, columns=("memoo",))
    assert not (tmp_path / "bad").exists()


def test_dask_equals_in_memory_with_a_date_column(tmp_path, client):
    # Calendar parts are computed per partition from the fitted calendar: the same features, flags and
    # calendar column hits (a Sunday and a late posting planted) as the in-memory scan.
    frame, _ = planted_outliers(2_000, 4, seed=14)
    rng = np.random.default_rng(14)
    days = pd.bdate_range("2025-01-02", "2025-12-30")
    when = pd.to_datetime(rng.choice(days, 2_000)) + pd.to_timedelta(rng.integers(480, 1080, 2_000), unit="m")
    frame["posted_at"] = when.strftime("%Y-%m-%d %H:%M")
    frame.loc[[7, 1500], "posted_at"] = ["2025-03-09 10:00", "2025-05-20 23:10"]
    data = _write_parts(tmp_path / "ds", frame, 4)
    scan_dataset(data, ScanOptions(), out=tmp_path / "out", client=client)
    memory = investigator.scan(data)
    expected, got = memory.to_frame(), _read(tmp_path / "out")
    _assert_same_records(expected, got, memory.method_results)
    assert list(got["column_hits"]) == list(expected["column_hits"])
    assert "posted_at: weekend" in got["column_hits"][7] and "posted_at: outside hours" in got["column_hits"][1500]


def test_with_a_smaller_fit_sample_scores_equal_the_same_model_applied_in_memory(tmp_path, client):
    frame, _ = planted_outliers(30_000, 5, seed=14)
    data = _write_parts(tmp_path / "ds", frame, 6)
    result = scan_dataset(data, ScanOptions(), out=tmp_path / "out", client=client, fit_sample=8_000)
    assert result.run.fit.sample == 8_000
    lengths = [5_000] * 6
    picks = draw_sample(lengths, 8_000, 0)
    rows = np.concatenate([p + 5_000 * i for i, p in enumerate(picks)])
    sample = Table(frame.iloc[rows].reset_index(drop=True), Source(str(data), "parquet dataset"), None, [], rows + 1)
    model = ScanModel.fit(sample, ScanOptions())
    expected = model.score_frame(frame, 0)
    _assert_same_records(expected, _read(tmp_path / "out"), model.fitted_methods)


def test_workers_with_a_memory_limit_well_below_the_dataset_complete_without_restarts(tmp_path):
    # 250,000 records carrying a 5,000-character memo each: about 1.3 GB in memory, against 800 MB per
    # worker (of which a worker's own imports and the fitted model take 350-450 MB; with 600 MB a worker
    # came above the 80% at which Dask pauses it, and the scan waited for ever). Workers are never restarted
    # (a nanny restarts a worker that passes 95% of its limit), and every record is scored.
    rng = np.random.default_rng(15)
    memos = np.array(["".join(rng.choice(list("abcdefgh"), 5_000)) for _ in range(32)], dtype=object)
    folder, size, n_parts, per = tmp_path / "ds", 0, 50, 5_000
    folder.mkdir()
    for i in range(n_parts):
        part, _ = planted_outliers(per, 6, seed=100 + i)
        part["memo"] = memos[rng.integers(0, 32, per)] + pd.Series(np.arange(per) + i * per).astype(str).to_numpy()
        size += int(part.memory_usage(deep=True).sum())
        part.to_parquet(folder / f"part.{i}.parquet", index=False)
    limit = 800 * 2**20
    assert size > 1.5 * limit
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, memory_limit=limit,
                                       dashboard_address="127.0.0.1:0", silence_logs=logging.ERROR)
    with distributed.Client(cluster) as c:
        pids = set(c.run(os.getpid).values())
        result = scan_dataset(folder, ScanOptions(), out=tmp_path / "out", client=c, fit_sample=20_000)
        assert set(c.run(os.getpid).values()) == pids
        assert set(c.run(lambda dask_worker: dask_worker.memory_manager.memory_limit).values()) == {limit}
    cluster.close()
    out = pd.read_parquet(tmp_path / "out", columns=["row", "flagged"])
    assert sorted(out["row"]) == list(range(1, n_parts * per + 1))
    assert result.run.flagged == int(out["flagged"].sum()) > 0


def test_the_command_line_connects_to_an_existing_cluster(tmp_path, client, capsys):
    frame, _ = planted_outliers(2_000, 4, seed=16)
    data = _write_parts(tmp_path / "ds", frame, 3)
    address = client.scheduler.address
    code = main(["scan", str(data), "--engine", "dask", "--scheduler", address, "--out", str(tmp_path / "out"),
                 "--top", "3"])
    out = capsys.readouterr().out
    assert code == 0 and "on Dask (" + address in out and "Top 3 flagged records" in out
    assert "not proof of error or fraud" in out
    run = json.loads((tmp_path / "out" / RUN_FILE).read_text())
    assert run["engine"] == "dask" and run["cluster"]["scheduler"] == address
    assert any(a["part"].startswith("neighbour search") for a in run["approximations"])
    # A second run replaces the earlier results folder as a whole.
    assert main(["scan", str(data), "--engine", "dask", "--scheduler", address, "--out", str(tmp_path / "out"),
                 "--quiet", "--seed", "3"]) == 0
    assert json.loads((tmp_path / "out" / RUN_FILE).read_text())["seed"] == 3
    assert not (tmp_path / "out.part").exists()


@pytest.mark.parametrize("extra, message", [
    (["--out", "{tmp}/res.csv"], "give a folder name"),
    ([], "give --out FOLDER"),
    (["--out", "{tmp}/mine"], "is not an earlier results folder"),
    (["--out", "{tmp}/res", "--digits", "f0"], "--digits is not available with --engine dask"),
    (["--out", "{tmp}/res", "--fit-sample", "5"], "--fit-sample must be a whole number of at least 100"),
    (["--out", "{tmp}/res", "--id", "nope"], "--id column 'nope' not found"),
])
def test_bad_dask_options_are_one_line_errors_and_touch_nothing(tmp_path, capsys, extra, message):
    frame, _ = planted_outliers(200, 3)
    data = _write_parts(tmp_path / "ds", frame, 2)
    (tmp_path / "mine").mkdir()
    (tmp_path / "mine" / "notes.txt").write_text("keep me")
    args = ["scan", str(data), "--engine", "dask", *[a.format(tmp=tmp_path) for a in extra]]
    code = main(args)
    err = capsys.readouterr().err
    assert code == 2 and message in err and len(err.strip().splitlines()) == 1, err
    assert (tmp_path / "mine" / "notes.txt").read_text() == "keep me"
    assert not (tmp_path / "res").exists()


def test_a_csv_file_or_a_dask_option_without_the_engine_is_refused(tmp_path, capsys):
    frame, _ = planted_outliers(200, 3)
    frame.to_csv(tmp_path / "a.csv", index=False)
    assert main(["scan", str(tmp_path / "a.csv"), "--engine", "dask", "--out", str(tmp_path / "r")]) == 2
    assert "--engine dask reads Parquet" in capsys.readouterr().err
    assert main(["scan", str(tmp_path / "a.csv"), "--scheduler", "tcp://127.0.0.1:1"]) == 2
    assert "applies to --engine dask only" in capsys.readouterr().err


def test_an_unreachable_scheduler_is_a_one_line_error(tmp_path, capsys):
    frame, _ = planted_outliers(200, 3)
    data = _write_parts(tmp_path / "ds", frame, 2)
    code = main(["scan", str(data), "--engine", "dask", "--scheduler", "tcp://127.0.0.1:9", "--out",
                 str(tmp_path / "r")])
    err = capsys.readouterr().err
    assert code == 2 and "could not connect" in err and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "r").exists()


def test_a_duplicate_key_across_partitions_names_the_rows(tmp_path, client):
    frame, _ = planted_outliers(300, 3)
    frame.insert(0, "id", np.arange(300))
    frame.loc[250, "id"] = 7  # row 251 repeats the key of row 8, in another partition
    data = _write_parts(tmp_path / "ds", frame, 3)
    with pytest.raises(investigator.InputError, match=r"value '7' in rows 8, 251"):
        scan_dataset(data, ScanOptions(id="id"), out=tmp_path / "out", client=client)
    assert load_table(data, id_column=None).n_rows == 300
    frame["id"] = frame["id"].astype("float64")
    frame.loc[250, "id"] = np.nan  # row 251 has no key
    data = _write_parts(tmp_path / "gap", frame, 3)
    with pytest.raises(investigator.InputError, match=r"`id` column 'id' is empty in row 251;"):
        scan_dataset(data, ScanOptions(id="id"), out=tmp_path / "out", client=client)
    assert not (tmp_path / "out").exists()


def test_the_demo_with_two_kinds_of_normal_scores_alike_on_dask(tmp_path, client):
    # The demo data have two kinds of normal; on Dask and in memory alike each record is judged within the
    # kind it is nearest to, so scores and flags are the same.
    from investigator.io.demo import DEMO_ID, write_demo

    table = load_table(write_demo(tmp_path))
    data = _write_parts(tmp_path / "ds", table.frame, 4)
    memory = investigator.scan(data, id=DEMO_ID)
    assert "2 kinds of normal" in " ".join(memory.run.notices)
    result = scan_dataset(data, out=tmp_path / "out", client=client, id=DEMO_ID)
    got, expected = _read(tmp_path / "out"), memory.to_frame()
    for key in memory.method_results:
        np.testing.assert_allclose(got[f"score_{key}"], expected[f"score_{key}"], rtol=1e-9, atol=1e-9, err_msg=key)
    assert (got["flagged"] == expected["flagged"]).all()
    assert len(result.run.fitted.kinds.sizes) == 2  # one MCD per kind
