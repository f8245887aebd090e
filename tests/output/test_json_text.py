"""The fast JSON writer (investigator/io/json_text.py, records built column-wise in output/records.py): the same
bytes as the standard library's json module gives for the same document, on the demo and on messy data."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

import investigator
from fixtures.messy import purchase_lines, zero_inflated
from investigator.io.json_text import json_bytes
from investigator.io.writers import to_json_text
from investigator.output.records import record, to_dict


def standard_bytes(result) -> bytes:
    """Today's writer, as it was: one dict per record from record(), the standard library's encoder."""
    explained = result.explainer.flagged()
    document = {"run": result.run.to_dict(),
                "records": [record(result, i, explained.get(i)) for i in range(result.n_records)]}
    if result.group_cases is not None:
        document["groups"] = [g.to_dict() for g in result.group_cases]
    return to_json_text(document).encode("utf-8")


def test_values_of_every_kind_as_the_standard_library_writes_them():
    rng = np.random.default_rng(3)
    floats = (rng.uniform(1, 10, 20_000) * 10.0 ** rng.integers(-30, 30, 20_000)
              * rng.choice([-1, 1], 20_000)).tolist()
    # The edges of Python's exponent form (below 1e-4 and from 1e16), signed zero, the extremes of float64.
    floats += [1e-4, 9.999999999999999e-05, 1e16, 9999999999999998.0, -0.0, 0.0, 5e-324, 1.7976931348623157e308]
    document = {
        "floats": floats, "odd": [float("nan"), float("inf"), -float("inf"), np.float64("nan")],
        "numpy": [np.float64(1e-7), np.int64(-3), np.bool_(True), np.float32(0.5)],
        "text": ["\x00\x1f\x7f\u2028 é ü 漢字 🙂", "\"quoted\" \\ back\tslash\n\r\b\f", "1e-05", "", "  two  spaces"],
        "nested": {"empty_list": [], "empty_dict": {}, "deep": [{"a": [1, {"b": [None, {"c": []}]}]}]},
        3: "an integer key", "tuple": (1, 2.5, "x"), "big": 2**70,
    }
    ours = json_bytes(document)
    assert ours == to_json_text(document).encode("utf-8")
    document.pop("big")  # beyond 64 bits orjson refuses; the standard encoder wrote it above
    assert json_bytes(document) == to_json_text(document).encode("utf-8")
    assert json.loads(ours) == json.loads(to_json_text(document | {"big": 2**70}))


def test_the_demo_result_is_written_byte_for_byte_as_before(demo_scan, tmp_path):
    _, result = demo_scan
    written = result.write(tmp_path / "demo.json").read_bytes()
    assert written == standard_bytes(result)
    assert json.loads(written) == json.loads(to_json_text(to_dict(result)))
    assert result.records() == json.loads(json.dumps(to_dict(result)["records"]))  # the API's records, plain


@pytest.mark.slow
@pytest.mark.parametrize("make", ["purchase_lines", "zero_inflated", "unicode_keys"])
def test_messy_results_are_written_byte_for_byte_as_before(make, tmp_path):
    if make == "unicode_keys":  # keys and levels in several scripts, missing cells, a formula-like text
        rng = np.random.default_rng(4)
        n = 400
        frame = pd.DataFrame({"código": [f"Ü-{i}" if i % 3 else f"漢{i}" for i in range(n)],
                              "montant": np.where(rng.random(n) < 0.05, np.nan, rng.gamma(2, 50, n)),
                              "tiny": rng.normal(0, 1e-9, n), "huge": rng.normal(0, 1e18, n),
                              "région": rng.choice(["nörd", "süd", "=ost"], n)})
        key = "código"
    else:
        frame, _ = purchase_lines() if make == "purchase_lines" else zero_inflated()
        key = None
    path = tmp_path / "d.csv"
    frame.to_csv(path, index=False)
    result = investigator.scan(path, id=key, resamples=3, map="pca") if key else investigator.scan(path, map="pca")
    written = result.write(tmp_path / "out.json").read_bytes()
    assert written == standard_bytes(result)
    assert written.count(b"\n") > result.n_records  # one value a line: the indented form
