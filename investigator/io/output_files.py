"""Output files: never one of the inputs, written whole or not at all.

Every command and API writer that creates a file (scan results, the report and cases table, the verdicts
export, the map PNG, the Dask results folder) goes through here:

- :func:`check_not_input` refuses an output that is an input of the run (the data file, a file of a
  Parquet dataset, the reference, the limits file, the review store), compared by resolved path and by
  file identity (``os.path.samefile``: the same device and inode, so a symbolic or hard link to the data is
  caught too). The commands call it before any work, the writers again before writing.
- :func:`atomic_output` writes under a temporary ``NAME.part`` beside the output and renames it over the
  output only when complete (``os.replace`` is atomic on POSIX and Windows within one file system, Python
  documentation), so a killed run or a full disk never leaves a truncated file under the real name and an
  earlier output stays as it was. A ``.part`` left by a killed run is removed on the next write.
- :func:`write_error` turns a failed write (full disk, no permission) into a one-line ``InputError``.

Only the standard library is imported here.
"""

from __future__ import annotations

import errno
import os
import shutil
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path

from investigator.errors import InputError

PART = ".part"  # the suffix of an output being written

NO_SPACE = {errno.ENOSPC, getattr(errno, "EDQUOT", errno.ENOSPC)}
NO_PERMISSION = {errno.EACCES, errno.EPERM, errno.EROFS}


def part_path(path: Path) -> Path:
    """Where ``path`` is written before it is complete: ``out.csv`` -> ``out.csv.part``."""
    return path.with_name(path.name + PART)


def same_file(a: str | Path, b: str | Path) -> bool:
    """True when ``a`` and ``b`` are the same file: the same resolved path, or (both existing) the same
    device and inode, as a symbolic or hard link to it is."""
    a, b = Path(a), Path(b)
    try:
        if a.resolve() == b.resolve():
            return True
    except (OSError, RuntimeError):  # a symlink loop: compare by identity below
        pass
    try:
        return os.path.samefile(a, b)
    except OSError:  # one of them does not exist (yet): not the same file
        return False


def within(path: str | Path, folder: str | Path) -> bool:
    """True when ``path`` is ``folder`` or lies anywhere below it (resolved paths)."""
    try:
        p, f = Path(path).resolve(), Path(folder).resolve()
    except (OSError, RuntimeError):
        return False
    return p == f or f in p.parents or same_file(path, folder)


def check_not_input(out: str | Path, inputs: Iterable[tuple[str, str | Path | None]], *, parameter: str,
                    folder: bool = False) -> None:
    """Refuse ``out`` when it, or its temporary ``.part``, is one of ``inputs`` (pairs of what the input is,
    e.g. "data file", and its path; None paths are skipped). ``folder``: ``out`` is a folder that is
    replaced as a whole, so an input anywhere inside it is refused too, and so is a folder output inside a
    data folder (the next scan of that folder would read the results as data)."""
    out = Path(out)
    for what, given in inputs:
        if given is None:
            continue
        path = Path(given)
        if folder:
            hit = within(path, out) or within(path, part_path(out))
            if not hit and path.is_dir() and within(out, path):
                raise InputError(f"{parameter}={out}: lies inside the {what} {path}; give a folder outside it, "
                                 "so the results are not read as data by the next scan", parameters=(parameter,))
        else:
            hit = same_file(out, path) or same_file(part_path(out), path)
        if hit and folder and not same_file(out, path):
            raise InputError(f"{parameter}={out}: holds the {what} {path}, and the results folder is replaced "
                             f"as a whole; give another `{parameter}`", parameters=(parameter,))
        if hit:
            raise InputError(f"{parameter}={out}: is the {what} {path} (the same file); give another "
                             f"`{parameter}` so that it is not overwritten", parameters=(parameter,))


def remove(path: Path) -> None:
    """Remove a file or folder if it is there (a leftover ``.part``); a failure to remove is not reported
    over the error that led here."""
    try:
        if path.is_dir() and not path.is_symlink():
            shutil.rmtree(path)
        else:
            path.unlink(missing_ok=True)
    except OSError:
        pass


def write_error(path: Path, exc: OSError, parameter: str) -> InputError:
    """A failed write as one line: what happened and what to do."""
    code = exc.errno
    if code in NO_SPACE:
        why = f"no space left on device; free some space or give another `{parameter}`"
    elif code in NO_PERMISSION:
        why = f"permission denied: choose another folder (give another `{parameter}`)"
        if code == errno.EROFS:
            why = f"the file system is read-only: choose another folder (give another `{parameter}`)"
    else:
        reason = exc.strerror or type(exc).__name__
        why = f"{reason.lower()}; check the folder, or give another `{parameter}`"
    return InputError(f"cannot write {path}: {why}", parameters=(parameter,))


@contextmanager
def atomic_output(path: str | Path, *, parameter: str) -> Iterator[Path]:
    """Write ``path`` whole or not at all: yields the temporary path to write; on success it replaces
    ``path``; on any failure it is removed (an ``OSError`` becomes a one-line ``InputError``) and whatever
    was at ``path`` before is left as it was."""
    path = Path(path)
    tmp = part_path(path)
    remove(tmp)  # left by a killed run
    try:
        yield tmp
        os.replace(tmp, path)
    except OSError as exc:
        remove(tmp)
        raise write_error(path, exc, parameter) from None
    except BaseException:
        remove(tmp)
        raise
