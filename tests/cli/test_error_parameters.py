"""Errors speak of parameters in the API and of flags on the command line.

The engine spells a parameter as the Python API does (``row=5``, or ```cutoff``` alone) and lists it in
``InputError.parameters``; ``investigator.cli.options.flag_message`` turns exactly those spellings into the
flags (``--row 5``, ``--cutoff``), so the command line's messages are the ones it always printed. Data is
invented here; no test runs a scan.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import investigator
from investigator.cli.main import main
from investigator.cli.options import flag, flag_message
from investigator.errors import InputError
from investigator.io.tables import load_table
from investigator.pipeline.dask_engine import check_dask_options
from investigator.review.verdicts import locate


def parts(n: int = 30) -> pd.DataFrame:
    """Invented parts with a column called ``id`` that is not the key, to show data is never rewritten."""
    rng = np.random.default_rng(11)
    return pd.DataFrame({"serial": [f"S{i:03d}" for i in range(n)], "id": rng.integers(0, 9, n),
                         "width": rng.normal(10, 1, n).round(2), "log": rng.choice(["a", "b"], n)})


def cli_error(capsys, argv: list[str]) -> str:
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1
    return err


def test_a_bad_parameter_through_the_api_says_the_parameter():
    with pytest.raises(InputError) as info:
        investigator.ScanOptions(cutoff=1.5)
    assert str(info.value) == "`cutoff` must be between 0.5 and 1 (a quantile such as 0.975), not 1.5"
    assert info.value.parameters == ("cutoff",)
    assert "--" not in str(info.value)


def test_the_same_through_the_command_line_says_the_flag(tmp_path, capsys):
    path = tmp_path / "parts.csv"
    parts().to_csv(path, index=False)
    err = cli_error(capsys, ["scan", str(path), "--quiet", "--cutoff", "1.5"])
    assert err == "investigator scan: error: --cutoff must be between 0.5 and 1 (a quantile such as 0.975), not 1.5\n"


def test_values_and_names_alone_both_become_flags(tmp_path, capsys):
    path = tmp_path / "parts.csv"
    parts().to_csv(path, index=False)
    with pytest.raises(InputError) as info:
        locate(load_table(path), row=None, key="S999")
    assert str(info.value) == (
        "parts.csv: no record with key 'S999' (without `id` a record's key is its row number; give id=COLUMN to "
        "use a key column); check the key or use row=N")
    err = cli_error(capsys, ["verdict", str(path), "--key", "S999", "--set", "confirmed"])
    assert err == (
        "investigator verdict: error: parts.csv: no record with key 'S999' (without --id a record's key is its "
        "row number; give --id COLUMN to use a key column); check the key or use --row N\n")


def test_data_that_looks_like_a_parameter_is_left_as_it_is(tmp_path, capsys):
    # The table has columns called `id` and `log`: the list of columns in the message keeps them as they are.
    path = tmp_path / "parts.csv"
    parts().to_csv(path, index=False)
    with pytest.raises(InputError, match="^parts.csv: `id` column 'key' not found; columns are: serial, id, width, "
                                         "log$"):
        investigator.scan(path, id="key")
    err = cli_error(capsys, ["scan", str(path), "--quiet", "--id", "key"])
    assert err == ("investigator scan: error: parts.csv: --id column 'key' not found; columns are: serial, id, width, "
                   "log\n")


def test_only_the_parameters_an_error_lists_are_rewritten():
    error = InputError("`cutoff` and `seed`; cutoff=2 and (seed=3) in /data/cutoff=4.csv, `log` not listed",
                       parameters=("cutoff", "seed"))
    assert flag_message(error) == ("--cutoff and --seed; --cutoff 2 and (--seed 3) in /data/cutoff=4.csv, "
                                   "`log` not listed")
    assert flag_message(InputError("`cutoff` must be a number")) == "`cutoff` must be a number"


@pytest.mark.parametrize(("parameter", "spelled"), [
    ("cutoff", "--cutoff"),
    ("worker_memory", "--worker-memory"),
    ("fit_sample", "--fit-sample"),
    ("state", "--set"),  # investigator verdict --set STATE
    ("path", "--out"),  # ScanResult.write(path) is --out on the command line
    ("scan_dataset", "--engine dask"),  # the Dask path is a function of its own in the API
])
def test_flag_spellings(parameter, spelled):
    assert flag(parameter) == spelled


def test_the_dask_path_is_named_as_the_api_names_it():
    with pytest.raises(InputError) as info:
        check_dask_options(investigator.ScanOptions(resamples=3))
    assert str(info.value) == ("`resamples` is not available with `scan_dataset` (it needs every record at once); "
                               "leave it out, or scan in memory")
    assert flag_message(info.value) == ("--resamples is not available with --engine dask (it needs every record at "
                                        "once); leave it out, or scan in memory")
