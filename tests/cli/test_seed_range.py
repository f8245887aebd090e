"""The seed's range: the seeds NumPy's RandomState takes, 0 to 2**32 - 1 (NumPy documentation,
``numpy.random.RandomState``: "must be convertible to 32 bit unsigned integers"), which scikit-learn's and
UMAP's ``random_state`` pass it to. Outside it: exit 2 and one line giving the range, never an internal error.
"""

from __future__ import annotations

import numpy as np
import pytest

import investigator
from fixtures.cli import assert_one_line_error
from investigator.errors import InputError
from investigator.pipeline.options import SEED_MAX, ScanOptions


def test_the_bound_is_numpys():
    np.random.RandomState(SEED_MAX)  # the largest seed NumPy takes
    with pytest.raises(ValueError):
        np.random.RandomState(SEED_MAX + 1)
    with pytest.raises(ValueError):
        np.random.RandomState(-1)


@pytest.fixture
def data(csv_of):
    return csv_of("parts")


@pytest.mark.parametrize("seed", ["99999999999999999999", str(SEED_MAX + 1), "-1", "-99999999999999999999"])
@pytest.mark.parametrize("command", ["scan", "explain", "map", "report"])
def test_a_seed_out_of_range_is_one_line(cli, data, tmp_path, command, seed):
    extra = {"explain": ["--row", "1"], "map": ["--out", tmp_path / "m.png"],
             "report": ["--out", tmp_path / "r.html"]}.get(command, [])
    code, out, err = cli(command, data, "--seed", seed, *extra)
    assert code == 2, err
    assert_one_line_error(err, "--seed", "0 to 4,294,967,295", seed)
    assert not list(tmp_path.glob("*.png")) and not list(tmp_path.glob("*.html"))


def test_the_largest_seed_scans(data):
    # Isolation forest is the method whose random_state is NumPy's RandomState.
    result = investigator.scan(data, methods="isolation", seed=SEED_MAX)
    assert result.run.to_dict()["seed"] == SEED_MAX


@pytest.mark.parametrize("seed", [SEED_MAX + 1, -1, 10**20, "12x", 1.5, True])
def test_api_seed_errors_name_the_parameter(seed):
    with pytest.raises(InputError, match="`seed` must be a whole number from 0 to") as caught:
        ScanOptions(seed=seed)
    assert caught.value.parameters == ("seed",)


def test_seed_help_gives_the_range(cli):
    code, out, _ = cli("scan", "--help")
    assert code == 0
    assert "4294967295" in " ".join(out.split())
