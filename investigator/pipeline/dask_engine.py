"""The Dask path: scan a Parquet dataset larger than memory on a Dask cluster.

1. Open the dataset (a folder or glob of Parquet files, in natural order) as a ``dask.dataframe`` and count
   the records of every partition.
2. Draw a reproducible sample across partitions: ``fit_sample`` positions drawn uniformly without
   replacement from all records (seed ``[seed, 19]``), so every partition contributes in proportion to
   its size; only those rows travel to the client.
3. Fit a :class:`~investigator.pipeline.scan_model.ScanModel` on the sample (the in-memory scan, on the client),
   broadcast it to every worker once (``Client.scatter``).
4. Score every partition in parallel with ``map_partitions``; each partition knows its first row, so row
   numbers and neighbour self-exclusion are those of the whole dataset.
5. Each partition's task also writes its file and returns its counts and top records, so the records are
   read once for scoring and the progress shows partitions done. The run record goes beside the files
   (``_run.json``, which Parquet readers skip); the summary is built from the partitions' counts.

Without a scheduler address a ``dask.distributed.LocalCluster`` is started: one single-threaded worker
process per core, each with an equal share of the machine's memory unless ``worker_memory`` is given.
"""

from __future__ import annotations

import json
import logging
import os
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path

import dask
import dask.dataframe as dd
import numpy as np
import pandas as pd
from dask import delayed
from dask.distributed import Client, LocalCluster, as_completed

from investigator.errors import InputError
from investigator.io.datasets import PARQUET_SUFFIXES, is_dataset, parquet_files
from investigator.io.output_files import check_not_input, part_path, remove, write_error
from investigator.io.tables import MIN_ROWS, Source, Table, read_parquet_schema
from investigator.output.columns import choose_columns
from investigator.output.summary import dataset_summary_text
from investigator.pipeline.options import ScanOptions
from investigator.pipeline.run_record import DatasetRunRecord, InputRecord, SampleFit
from investigator.pipeline.scan_model import ScanModel
from investigator.progress import Progress, silent

FIT_SAMPLE = 200_000
RUN_FILE = "_run.json"  # the leading underscore makes Parquet readers skip it
SCORES_FILE = "scores-{:05d}.parquet"  # one per partition, in partition order; our name, not the writer's default
UNSUPPORTED = ("resamples", "digits", "round", "threshold", "duplicates", "map", "within")


@dataclass
class DatasetScan:
    """What a Dask scan wrote and found: the output folder, the run record and the top flagged records."""

    out: Path
    run: DatasetRunRecord
    top: pd.DataFrame  # the flagged records with the highest consensus (row, key, consensus, votes, ...)

    def summary(self) -> str:
        return dataset_summary_text(self)


def check_dask_options(options: ScanOptions) -> None:
    if options.header_row is not None:
        raise InputError("`header_row` is not available with `scan_dataset`: Parquet files have their column "
                         "names; leave it out", parameters=("header_row", "scan_dataset"))
    for name in UNSUPPORTED:
        value = getattr(options, name)
        if value and value != "none":
            raise InputError(f"`{name}` is not available with `scan_dataset` (it needs every record at once); "
                             "leave it out, or scan in memory", parameters=(name, "scan_dataset"))


def check_out_folder(out) -> Path:
    """The results folder: new, or the results of an earlier run (replaced only once the new run is written)."""
    if out is None:
        raise InputError("`scan_dataset` writes a partitioned Parquet dataset: give out=FOLDER",
                         parameters=("scan_dataset", "out"))
    path = Path(out)
    if path.suffix.lower() in (".json", ".csv", ".parquet"):
        raise InputError(f"out={path}: `scan_dataset` writes a folder of Parquet files; give a folder name "
                         "without .json/.csv/.parquet", parameters=("out", "scan_dataset"))
    if path.exists() and (not path.is_dir() or (any(path.iterdir()) and not (path / RUN_FILE).exists())):
        raise InputError(f"out={path}: exists and is not an earlier results folder of this tool; choose "
                         "another `out` so nothing there is overwritten", parameters=("out",))
    if not path.parent.exists():
        raise InputError(f"out={path}: folder {path.parent} does not exist; create it first", parameters=("out",))
    return path


def connect(scheduler: str | None = None, workers: int | None = None, worker_memory: str | None = None):
    """A ``distributed.Client``: to the scheduler at ``scheduler``, or to a new LocalCluster sized to the
    machine. Returns (client, description)."""
    if scheduler:
        try:
            client = Client(scheduler, timeout="10s")
        except (OSError, TimeoutError, ValueError) as exc:
            reason = str(exc).strip().splitlines()[0][:120] if str(exc).strip() else type(exc).__name__
            raise InputError(f"scheduler={scheduler}: could not connect ({reason}); check the address "
                             "(e.g. tcp://host:8786) and that the scheduler is running",
                             parameters=("scheduler",)) from None
        return client, {"scheduler": scheduler}
    n = workers or os.cpu_count() or 1
    memory = worker_memory or "auto"
    try:
        # Everything listens on this machine only (the status pages too, on a free port).
        cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True, memory_limit=memory,
                               host="127.0.0.1", dashboard_address="127.0.0.1:0", silence_logs=logging.ERROR)
    except ValueError as exc:
        raise InputError(f"worker_memory={worker_memory}: {exc}; give a size such as 2GB",
                         parameters=("worker_memory",)) from None
    limit = cluster.workers[next(iter(cluster.workers))].memory_manager.memory_limit if cluster.workers else None
    return Client(cluster), {"scheduler": "LocalCluster", "workers": n, "threads_per_worker": 1,
                             "memory_limit_per_worker": int(limit) if limit else None}


def open_dataset(data):
    """The dataset's files and its ``dask.dataframe``, with errors a user can act on."""
    if not is_dataset(data) and Path(data).suffix.lower() not in PARQUET_SUFFIXES and Path(data).is_file():
        raise InputError(f"{data}: `scan_dataset` reads Parquet (a file, a folder or a glob of files); convert "
                         "it to Parquet, or scan it in memory without `scan_dataset`", parameters=("scan_dataset",))
    files = parquet_files(data)
    names = read_parquet_schema(files[0])
    for path in files[1:]:
        if read_parquet_schema(path) != names:
            raise InputError(f"{path}: its columns differ from those of {files[0].name}; every file of a "
                             "dataset needs the same columns in the same order")
    return files, dd.read_parquet([str(p) for p in files])


def draw_sample(lengths: list[int], size: int, seed: int) -> list[np.ndarray]:
    """Per partition, the sorted local positions of a uniform random sample of ``size`` records of all
    (all records when there are fewer)."""
    total = int(sum(lengths))
    if size >= total:
        return [np.arange(n) for n in lengths]
    chosen = np.sort(np.random.default_rng([seed, 19]).choice(total, size=size, replace=False))
    starts = np.concatenate([[0], np.cumsum(lengths)])
    return [chosen[(chosen >= a) & (chosen < b)] - a for a, b in zip(starts[:-1], starts[1:], strict=True)]


def _rows_where(values: pd.Series, offsets: list[int], test, partition_info=None) -> pd.Series:
    """1-based dataset rows of a partition's values that pass ``test``."""
    hit = np.flatnonzero(test(values).to_numpy())
    return pd.Series(hit + offsets[partition_info["number"]] + 1, dtype="int64")


def _check_keys(keys, offsets: list[int], column: str, name: str) -> None:
    """Every record has a key and no two share one, checked on the cluster; only offenders reach the client."""
    meta = pd.Series([], dtype="int64")
    missing = keys.map_partitions(_rows_where, offsets, pd.Series.isna, meta=meta).head(1, npartitions=-1)
    if len(missing):
        raise InputError(f"{name}: `id` column '{column}' is empty in row {missing.iloc[0]}; every record needs a "
                         "key (fill it in, or leave `id` out to key records by row)", parameters=("id",))
    counts = keys.value_counts()
    repeated = counts[counts > 1].compute()
    if len(repeated):
        value = repeated.index[0]
        rows = keys.map_partitions(_rows_where, offsets, lambda v: v == value, meta=meta).compute()
        first = sorted(rows)[:3]
        raise InputError(f"{name}: `id` column '{column}' has the value '{value}' in rows "
                         f"{', '.join(map(str, first))}; a key must be unique (choose another column, or leave "
                         "`id` out to key records by row)", parameters=("id",))


def _take(frame: pd.DataFrame, picks: list[np.ndarray], partition_info=None) -> pd.DataFrame:
    return frame.iloc[picks[partition_info["number"]]]


def _score(frame: pd.DataFrame, model, offsets: list[int], meta: pd.DataFrame, columns, partition_info=None):
    if len(frame) == 0:  # an empty file is a partition with nothing to score
        return meta.copy()
    out = model.score_frame(frame, offsets[partition_info["number"]], columns)
    return out.astype(meta.dtypes.to_dict())


def scan_dataset(data, options: ScanOptions | None = None, *, out, scheduler: str | None = None,
                 fit_sample: int = FIT_SAMPLE, workers: int | None = None, worker_memory: str | None = None,
                 top: int = 10, progress: Progress = silent, client=None, columns=None,
                 **option_values) -> DatasetScan:
    """Scan the Parquet dataset ``data`` (folder or glob) on Dask and write the results to the folder ``out``.

    Scan options come as ``options=ScanOptions(...)`` or as keywords (``id``, ``methods``, ``cutoff``, ...).
    ``scheduler``: address of an existing cluster (default: a LocalCluster for the run). ``client``: an
    existing ``distributed.Client`` to use instead (then ``scheduler``, ``workers`` and ``worker_memory`` are
    ignored). ``columns``: the input columns written after the result columns (all by default, ``()`` for
    none, or those named). Raises :class:`InputError` on bad input; nothing is written then.
    """
    if options is None:
        options = ScanOptions(**option_values)
    elif option_values:
        raise TypeError("give either options=ScanOptions(...) or keyword options, not both")
    check_dask_options(options)
    out = check_out_folder(out)
    if not isinstance(fit_sample, int) or fit_sample < 100:
        raise InputError(f"`fit_sample` must be a whole number of at least 100, not '{fit_sample}'",
                         parameters=("fit_sample",))
    started = datetime.now(UTC).replace(microsecond=0).isoformat()
    progress("opening the dataset", 0.01)
    files, ddf = open_dataset(data)
    # The results folder is replaced as a whole: it must hold none of the inputs, nor lie in the data folder.
    folder = [("data folder", str(data))] if Path(str(data)).is_dir() else []
    check_not_input(out, [*folder, *(("data file", f) for f in files), ("limits file", options.limits)],
                    parameter="out", folder=True)
    if options.id is not None and options.id not in ddf.columns:
        raise InputError(f"{data}: `id` column '{options.id}' not found; columns are: "
                         f"{', '.join(map(str, ddf.columns[:12]))}", parameters=("id",))
    if columns is not None:  # an unknown input column stops the run before the cluster starts
        choose_columns(Table(ddf._meta, Source(str(data), "parquet dataset")), columns)
    own = client is None
    if own:
        client, cluster_info = connect(scheduler, workers, worker_memory)
    else:
        cluster_info = {"scheduler": "given client"}
    try:
        lengths = [int(v) for v in ddf.map_partitions(len).compute()]
        if sum(lengths) < MIN_ROWS:
            raise InputError(f"{data}: has only {sum(lengths)} data rows; a scan needs at least {MIN_ROWS}")
        offsets = np.concatenate([[0], np.cumsum(lengths)[:-1]]).astype(int).tolist()
        if options.id is not None:
            _check_keys(ddf[options.id], offsets, options.id, str(data))
        progress("drawing the fit sample", 0.05)
        picks = draw_sample(lengths, fit_sample, options.seed)
        # Each partition's share of the sample comes to the client on its own: gathering them as one
        # collection would first concatenate the whole sample on a single worker.
        pieces = client.gather(client.compute(ddf.map_partitions(_take, picks, meta=ddf._meta).to_delayed()))
        frame = pd.concat(pieces, ignore_index=True)
        del pieces
        rows = np.concatenate([p + o for p, o in zip(picks, offsets, strict=True)]) + 1
        source = Source(str(data), "parquet dataset")
        sample = Table(frame, source, options.id, [], rows)
        progress("fitting on the sample", 0.1)
        model = ScanModel.fit(sample, options)
        # The output's columns and types, from a few sample records (their row numbers do not matter here).
        meta = model.score_frame(frame.iloc[:50], int(rows[0]) - 1, columns).iloc[:0]
        progress("scoring the partitions", 0.4)
        shared = client.scatter(model, broadcast=True)
        scored = ddf.map_partitions(_score, shared, offsets, meta, columns, meta=meta).to_delayed()
        tmp = part_path(out)
        remove(tmp)  # left by a killed run
        try:
            tmp.mkdir()
        except OSError as exc:
            raise write_error(out, exc, "out") from None
        # One task per partition scores it, writes its file and returns its counts and top records, so the
        # results are read once and progress can be shown partition by partition.
        listed = ["row", "key", "consensus", "consensus_z", "votes", "top_features"]
        writes = [delayed(_write_part)(part, str(tmp / SCORES_FILE.format(i)), list(model.fitted_methods), listed, top)
                  for i, part in enumerate(scored)]
        summaries = []
        try:
            for done, future in enumerate(as_completed(client.compute(writes)), 1):
                summaries.append(future.result())
                progress(f"scored {done:,} of {len(writes):,} partitions", 0.4 + 0.55 * done / len(writes))
            top_frame, counts = _combine_summaries(summaries, top)
            run = _run_record(model, data, files, lengths, fit_sample, cluster_info, counts, started, out)
            (tmp / RUN_FILE).write_text(json.dumps(run.to_dict(), indent=1, default=_plain) + "\n",
                                        encoding="utf-8")
            _replace_folder(tmp, out)
        except OSError as exc:
            remove(tmp)
            raise write_error(out, exc, "out") from None
        except BaseException:
            remove(tmp)
            raise
    finally:
        if own:
            cluster = getattr(client, "cluster", None)
            client.close()
            if cluster is not None:
                cluster.close()
    progress("done", 1.0)
    return DatasetScan(out, run, top_frame)


def _replace_folder(new: Path, out: Path) -> None:
    """Put the complete folder ``new`` at ``out``; an earlier results folder there (checked before the run)
    is moved aside first and removed only once the new one is in place, so a failure keeps it."""
    if not out.exists():
        new.replace(out)
        return
    old = out.with_name(out.name + ".old")
    remove(old)
    out.replace(old)
    try:
        new.replace(out)
    except OSError:
        old.replace(out)
        raise
    remove(old)


def _write_part(frame: pd.DataFrame, path: str, methods: list[str], columns: list[str], top: int) -> dict:
    """Write one scored partition; return its counts and its ``top`` flagged records by consensus_z."""
    frame.to_parquet(path, index=False)
    counts = {"flagged": int(frame["flagged"].sum()), **{f"flag_{k}": int(frame[f"flag_{k}"].sum()) for k in methods}}
    best = frame.loc[frame["flagged"], columns].nlargest(top, "consensus_z")
    return {"counts": counts, "top": best}


def _combine_summaries(summaries: list[dict], top: int) -> tuple[pd.DataFrame, dict]:
    counts: dict[str, int] = {}
    for s in summaries:
        for k, v in s["counts"].items():
            counts[k] = counts.get(k, 0) + v
    tops = [s["top"] for s in summaries if len(s["top"])]
    if not tops:
        return summaries[0]["top"].iloc[:0], counts
    best = pd.concat(tops, ignore_index=True).sort_values(["consensus_z", "row"], ascending=[False, True])
    return best.head(top).reset_index(drop=True), counts


def _run_record(model, data, files, lengths, fit_sample, cluster_info, counts, started, out) -> DatasetRunRecord:
    total = int(sum(lengths))
    return DatasetRunRecord(
        started=started,
        cluster=cluster_info,
        input=InputRecord(path=str(data), format="parquet dataset", files=len(files), partitions=len(lengths),
                          rows=total, key=model.key_column or "row"),
        fit=SampleFit(sample=model.n_fit, of=total, asked=fit_sample, structure_of_the_sample=model.run.structure),
        fitted=model.run,
        flagged=counts.get("flagged", 0),
        flags_by_method={k.removeprefix("flag_"): v for k, v in counts.items() if k != "flagged"},
        output={"folder": str(out), "format": "parquet dataset", "files": len(lengths)},
        dask_version=dask.__version__,
    )


def _plain(value):
    if hasattr(value, "item"):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    return str(value)
