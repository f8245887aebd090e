"""Reusing a scan: the result of a scan of a file, kept beside its review store and used again when the same
file is scanned with the same options by the same program (docs/large.md, "Reusing a scan").

Where: ``<data>.investigation-cache/scan-<digest>.npz`` in the data file's folder (beside
``<data>.investigation.sqlite``, the review store). What: one ``.npz`` file per scan holding the result's
arrays, its other state as JSON (:mod:`investigator.pipeline.cache_state`: no pickle; read with
``allow_pickle=False``) and the key it was made under. The key is the data file's sha256 and size and the
path it was given as, the sha256 of a limits file, every option of the scan (``ScanOptions.as_dict()``), the
program's version, the sha256 of the program's own source files (two builds of one version, such as a checkout
being worked on, do not share scans) and the versions of Python and of the libraries that compute or read
(``LIBRARIES``). The whole key is stored and compared before anything else is read, so a changed file, option,
program or version is never served, even if two keys shared a digest.

Not kept: data frames given in memory (no file to key on), scans against a reference (``check``), Parquet
datasets and the Dask path, results holding something :mod:`~investigator.pipeline.cache_state` cannot write
(a column of categories, say), and results of more than ``MAX_RECORDS`` records (the file grows with the
table: 68 MB at 50,000 x 20; see docs/large.md). The newest ``KEEP`` scans of a file are kept (reading one
counts as using it); older ones are deleted. A cache that cannot be read (damaged, cut short, another format)
is passed over with a warning and the scan runs afresh; its file is replaced by the new scan's.

``INVESTIGATOR_SCAN_CACHE=off`` (or ``0``, ``no``, ``false``) turns the cache off; ``scan(..., cache=False)``
and ``--fresh`` do so for one scan (``--fresh`` still keeps the new result for the next command).
"""

from __future__ import annotations

import contextlib
import functools
import hashlib
import json
import os
import platform
import warnings
from dataclasses import dataclass
from importlib import metadata
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from investigator.errors import InvestigatorWarning
from investigator.pipeline.cache_state import Unsupported, decode, encode
from investigator.version import __version__

if TYPE_CHECKING:
    from investigator.pipeline.options import ScanOptions
    from investigator.pipeline.result import ScanResult

FORMAT = 1  # of the cache file; a file of another format is passed over
KEEP = 4  # scans kept per data file, the most recently used
MAX_RECORDS = 200_000
SUFFIX = ".investigation-cache"
LIBRARIES = ("numpy", "scipy", "scikit-learn", "pandas", "umap-learn", "numba", "holidays", "pyarrow", "openpyxl")
OFF = ("off", "0", "no", "false")
READ, REFRESH = "read", "refresh"  # use and keep; keep only (--fresh)


def cache_folder(data: str | Path) -> Path:
    """The folder the scans of ``data`` are kept in (beside its review store)."""
    path = Path(data)
    return path.with_name(path.name + SUFFIX)


def cache_mode(cache: bool | str | None) -> str | None:
    """What to do: ``READ`` (use a matching scan and keep the new one), ``REFRESH`` (keep only) or None
    (neither). ``cache``: True/None (the default: read, unless ``INVESTIGATOR_SCAN_CACHE`` is off), False,
    or ``"refresh"``."""
    if cache is False or os.environ.get("INVESTIGATOR_SCAN_CACHE", "").strip().lower() in OFF:
        return None
    return REFRESH if cache == REFRESH else READ


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as f:
        while block := f.read(1 << 20):
            digest.update(block)
    return digest.hexdigest()


@functools.cache
def code_digest() -> str:
    """The sha256 of the program's source: every ``.py`` and ``.tcss`` file of the package, by its path within it
    (135 files, read once a process: 10 ms measured)."""
    root = Path(__file__).resolve().parents[1]
    digest = hashlib.sha256()
    for path in sorted(p for p in root.rglob("*") if p.suffix in (".py", ".tcss") and p.is_file()):
        digest.update(path.relative_to(root).as_posix().encode("utf-8") + b"\0")
        digest.update(path.read_bytes())
    return digest.hexdigest()


def _versions() -> dict[str, str | None]:
    out: dict[str, str | None] = {"investigator": __version__, "investigator source": code_digest(),
                                  "python": platform.python_version()}
    for name in LIBRARIES:  # from the installed metadata: importing the libraries would cost seconds
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = None
    return out


@dataclass(frozen=True)
class CacheEntry:
    """Where the scan of one file with one set of options is kept, and the key it is kept under."""

    path: Path
    key: dict[str, Any]
    mode: str

    @property
    def key_text(self) -> str:
        return json.dumps(self.key, sort_keys=True, ensure_ascii=True)

    def load(self) -> ScanResult | None:
        """The kept result when the file exists and its key is this one; None otherwise (a file that cannot be
        read gives a warning)."""
        if self.mode != READ or not self.path.is_file():
            return None
        try:
            with np.load(self.path, allow_pickle=False) as z:
                if int(z["format"]) != FORMAT or bytes(z["key"]).decode("utf-8") != self.key_text:
                    return None  # another key with the same digest, or another format: never served
                state = json.loads(bytes(z["state"]).decode("utf-8"))
                result = decode(state, z)
        except Exception as exc:  # noqa: BLE001 - whatever is wrong with a kept scan, the scan runs afresh
            warnings.warn(InvestigatorWarning(
                f"the kept scan {self.path} could not be read ({type(exc).__name__}); scanning afresh"), stacklevel=3)
            return None
        with contextlib.suppress(OSError):
            os.utime(self.path)  # most recently used
        return result

    def save(self, result: ScanResult) -> bool:
        """Keep ``result`` (True when kept). A result the cache cannot hold, or a folder that cannot be written,
        leaves things as they were: the cache saves time, it is never needed."""
        if result.n_records > MAX_RECORDS:
            return False
        try:
            state, arrays = encode(result)
            text = json.dumps(state, ensure_ascii=False, allow_nan=False, separators=(",", ":"))
        except (Unsupported, ValueError, RecursionError):
            return False
        folder = self.path.parent
        tmp = self.path.with_name(self.path.name + ".part")
        payload: dict[str, Any] = {f"a{i}": a for i, a in enumerate(arrays)}
        try:
            folder.mkdir(exist_ok=True)
            with tmp.open("wb") as f:
                np.savez(f, format=np.array(FORMAT), key=np.frombuffer(self.key_text.encode("utf-8"), np.uint8),
                         state=np.frombuffer(text.encode("utf-8"), np.uint8), **payload)
            os.replace(tmp, self.path)
        except OSError:
            tmp.unlink(missing_ok=True)
            return False
        _trim(folder)
        return True


def _trim(folder: Path) -> None:
    """Keep the ``KEEP`` most recently used scans of the folder."""
    try:
        kept = sorted(folder.glob("scan-*.npz"), key=lambda p: p.stat().st_mtime, reverse=True)
        for old in kept[KEEP:]:
            old.unlink(missing_ok=True)
    except OSError:
        pass


def cache_entry(data: Any, options: ScanOptions, cache: bool | str | None = None) -> CacheEntry | None:
    """The cache entry of scanning ``data`` with ``options``, or None when the cache does not apply (see the
    module docstring): a data frame, a folder or glob of Parquet files, a file that cannot be read, the cache off."""
    mode = cache_mode(cache)
    if mode is None or not isinstance(data, str | Path):
        return None
    path = Path(data)
    try:
        if not path.is_file():
            return None
        key: dict[str, Any] = {"format": FORMAT, "data": str(data), "size": path.stat().st_size,
                               "sha256": _sha256(path), "options": options.as_dict(), "versions": _versions()}
        if options.limits:
            key["limits_sha256"] = _sha256(Path(options.limits))
    except OSError:
        return None
    digest = hashlib.sha256(json.dumps(key, sort_keys=True).encode("utf-8")).hexdigest()[:24]
    return CacheEntry(cache_folder(path) / f"scan-{digest}.npz", key, mode)
