"""Amounts read to the cent, and the records a screen lists: shared by the amount screens.

The round-amount screen and the last-two-digits test read each amount as money: its absolute value in whole
cents, at the 15 significant digits a double always keeps (any decimal of 15 significant digits survives the
round trip to a float and back, as in the Benford screen). So 1,200.00 is 120,000 cents and a whole-unit
amount; 1,234.50 is 123,450 cents and not a whole-unit amount; 1199.9999999999998 (a computed 1,200) reads as
1,200.00; 12.345 has a part below the cent and is no whole-unit amount either. Amounts of 10**13 or more are
left out (their cents are beyond 15 significant digits); zeros, missing values, non-finite values and text
that does not parse are left out and counted.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from investigator.errors import InputError

# Cents are within 15 significant digits below 10**13 (13 digits of units and 2 of cents).
MAX_AMOUNT = 1e13


@dataclass(frozen=True)
class Cents:
    """Each amount's reading; arrays are aligned with the values passed in.

    ``cents`` is |x| in whole cents where ``on_cent`` (else 0); ``units`` the whole-unit part of |x| (the
    part before the decimal point) wherever ``used``.
    """

    used: np.ndarray      # nonzero, finite and below MAX_AMOUNT
    on_cent: np.ndarray   # used and a whole number of cents (at 15 significant digits)
    whole: np.ndarray     # on_cent with no cents: a whole-unit amount
    cents: np.ndarray     # int64
    units: np.ndarray     # int64
    negative: np.ndarray
    ignored: dict[str, int]


def read_cents(values) -> Cents:
    """Read a column of amounts to the cent (see the module notes)."""
    x = as_floats(values)
    n = x.shape[0]
    a = np.abs(x)
    finite = np.isfinite(a)
    zero = finite & (a == 0)
    large = finite & (a >= MAX_AMOUNT)
    used = finite & ~zero & ~large
    cents = np.zeros(n, dtype=np.int64)
    units = np.zeros(n, dtype=np.int64)
    on_cent = np.zeros(n, dtype=bool)
    if used.any():
        au = a[used]
        scaled = au * 100.0
        rounded = np.rint(scaled)
        # Half a unit in the 15th significant digit of |x|, in cents: within it, the value is that cent.
        with np.errstate(divide="ignore"):
            exponent = np.floor(np.log10(au))
        tolerance = 0.5 * 10.0 ** (exponent - 12)
        exact = np.abs(scaled - rounded) <= tolerance
        on_cent[used] = exact
        cents[used] = np.where(exact, rounded, 0).astype(np.int64)
        units[used] = np.where(exact, rounded // 100, np.floor(au)).astype(np.int64)
    whole = on_cent & (cents % 100 == 0)
    ignored = {"zero": int(zero.sum()), "missing": int((~finite).sum()), "too_large": int(large.sum())}
    return Cents(used=used, on_cent=on_cent, whole=whole, cents=cents, units=units,
                 negative=used & (x < 0), ignored=ignored)


def as_floats(values) -> np.ndarray:
    """A 1-d float array; text that does not parse and pandas' missing markers become NaN."""
    if isinstance(values, pd.Series | pd.Index):
        if isinstance(values.dtype, pd.api.extensions.ExtensionDtype):
            return pd.to_numeric(values, errors="coerce").astype("Float64").to_numpy(dtype=float, na_value=np.nan)
        values = values.to_numpy()
    arr = np.asarray(values).ravel()
    if arr.dtype.kind in "iufb":
        return arr.astype(float)
    return pd.to_numeric(pd.Series(arr, dtype=object), errors="coerce").to_numpy(dtype=float)


def listed_records(positions: np.ndarray, values: np.ndarray, keys: Sequence | None = None,
                   rows: Sequence | np.ndarray | None = None, extra: dict[str, np.ndarray] | None = None) -> list[dict]:
    """The records a screen lists, in file order: 0-based ``position``, 1-based data ``row``, ``key`` (the
    record key; the row when no keys are given) and the ``value`` screened, plus any ``extra`` fields
    (arrays aligned with ``positions``)."""
    out = []
    for i, p in enumerate(np.asarray(positions, dtype=np.int64).tolist()):
        row = int(rows[p]) if rows is not None else p + 1
        entry = {"position": p, "row": row, "key": plain(keys[p]) if keys is not None else row,
                 "value": plain(values[p])}
        for name, column in (extra or {}).items():
            entry[name] = plain(column[i])
        out.append(entry)
    return out


def check_keys(keys: Sequence | None, rows: Sequence | np.ndarray | None, n: int) -> None:
    for label, given in (("keys", keys), ("rows", rows)):
        if given is not None and len(given) != n:
            raise InputError(f"{len(given)} {label} were given for {n} values; give one per value")


def plain(value):
    """A JSON-friendly Python value: numpy scalars to Python, NaN and infinities to None."""
    if hasattr(value, "item"):
        value = value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


def num(value) -> float | None:
    """A float for JSON, None where it is not finite."""
    if value is None:
        return None
    value = float(value)
    return value if np.isfinite(value) else None
