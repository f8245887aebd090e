"""JSON as the standard library writes it, at orjson's speed: :func:`json_bytes` gives exactly the bytes of
``json.dumps(clean(document), ensure_ascii=False, indent=1, allow_nan=False) + "\\n"`` in UTF-8
(:func:`investigator.io.writers.to_json_text`), NaN and infinities written as null.

orjson (a JSON library written in Rust) differs from the standard library in three ways, each undone here:
it indents by two spaces (halved after the fact: a JSON text has no raw line break inside a string, so the
spaces after one are indentation), it writes small floats without an exponent (0.00001 for 1e-05;
every float that Python writes with an exponent, below 1e-4 or from 1e16 in size, is handed over as Python's
own text) and it refuses integers beyond 64 bits, text with lone surrogates and similar rarities, where the
standard library's encoder is used instead.
"""

from __future__ import annotations

import json
import math

import numpy as np
import orjson

from investigator.io.writers import to_json_text

# Python's repr writes a float with an exponent below this size and from SCIENTIFIC_FROM on (float_repr_style
# "short": the shortest text that reads back the same, in exponent form when the exponent is < -4 or >= 16).
SCIENTIFIC_BELOW = 1e-4
SCIENTIFIC_FROM = 1e16


def float_value(x: float):
    """A float as the document holds it: None for NaN and infinities, Python's own text where it has an
    exponent, else the float."""
    if not math.isfinite(x):
        return None
    size = abs(x)
    if size != 0.0 and (size < SCIENTIFIC_BELOW or size >= SCIENTIFIC_FROM):
        return orjson.Fragment(repr(x))
    return x


def float_column(values) -> list:
    """A column of floats (any array-like) as :func:`float_value` gives them, built from the array at once."""
    a = np.asarray(values, dtype=float)
    out = a.tolist()
    size = np.abs(a)
    odd = np.flatnonzero(~np.isfinite(a) | ((size != 0.0) & ((size < SCIENTIFIC_BELOW) | (size >= SCIENTIFIC_FROM))))
    for i in odd.tolist():
        out[i] = float_value(out[i])
    return out


def clean(obj):
    """``obj`` made ready for orjson: NaN/infinities to None, numpy scalars to Python values, tuples to lists,
    floats with an exponent as Python's text. Values already clean (the records' columns) pass as they are.
    The values of a dict or list are tested in the loop (a float of ordinary size, text, a whole number): most
    are, and a call for each would double the time."""
    t = type(obj)
    if t is dict:
        out = {}
        for k, v in obj.items():
            tv = type(v)
            if tv is float:
                out[k] = v if SCIENTIFIC_BELOW <= abs(v) < SCIENTIFIC_FROM else float_value(v)
            elif v is None or tv is str or tv is int or tv is bool:
                out[k] = v
            else:
                out[k] = clean(v)
        return out
    if t is list or t is tuple:
        items = []
        for v in obj:
            tv = type(v)
            if tv is float:
                items.append(v if SCIENTIFIC_BELOW <= abs(v) < SCIENTIFIC_FROM else float_value(v))
            elif v is None or tv is str or tv is int or tv is bool:
                items.append(v)
            else:
                items.append(clean(v))
        return items
    if t is float:
        return float_value(obj)
    if obj is None or t is str or t is int or t is bool or t is orjson.Fragment:
        return obj
    if isinstance(obj, float):
        return float_value(float(obj))
    if hasattr(obj, "item"):  # numpy scalar
        return clean(obj.item())
    if isinstance(obj, dict):
        return {k: clean(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [clean(v) for v in obj]
    return obj


def light_clean(obj):
    """:func:`clean` where it changes what orjson writes, else ``obj`` as it is (one quick dump to tell): orjson
    writes NaN and infinities as null itself, and every float from 1e-4 up as Python does; a float below
    (written 0.0000... or with e-), a numpy scalar (refused) or anything else orjson refuses needs the pass."""
    try:
        text = orjson.dumps(obj, option=orjson.OPT_NON_STR_KEYS)
    except (TypeError, orjson.JSONEncodeError):
        return clean(obj)
    return clean(obj) if b"0.0000" in text or b"e-" in text else obj


def halve_indent(text: bytes, depth: int) -> bytes:
    """Two-space indentation made one-space, ``depth`` the deepest level: after every line break, the first
    half of the spaces that follow is dropped (found for all lines at once, as arrays)."""
    a = np.frombuffer(text, dtype=np.uint8)
    breaks = np.flatnonzero(a == 10)
    width = np.zeros(len(breaks), dtype=np.int64)  # the spaces after each line break
    still = np.ones(len(breaks), dtype=bool)
    last = len(a) - 1
    for k in range(1, 2 * depth + 1):
        at = breaks + k
        still &= (at <= last) & (a[np.minimum(at, last)] == 32)
        if not still.any():
            break
        width += still
    drop = width // 2
    if not drop.any():
        return text
    # Mark the spaces to drop with a running sum: +1 where a line's indentation starts, -1 where its first
    # half ends (the runs never overlap, so the sum is 0 or 1).
    edges = np.zeros(len(a) + 1, dtype=np.int8)
    some = drop > 0
    edges[breaks[some] + 1] = 1
    edges[breaks[some] + 1 + drop[some]] -= 1
    return a[np.cumsum(edges[:-1], dtype=np.int8) == 0].tobytes()


def _depth(text: bytes) -> int:
    """The deepest indentation level of an indented JSON text (each test stops at the first line that deep)."""
    d = 0
    while b"\n" + b"  " * (d + 1) in text:
        d += 1
    return d


def json_bytes(document, *, cleaned: bool = False) -> bytes:
    """The UTF-8 bytes of :func:`investigator.io.writers.to_json_text` for ``document``. ``cleaned``: the
    document already holds only :func:`clean` values (skips that pass)."""
    try:
        text = orjson.dumps(document if cleaned else clean(document),
                            option=orjson.OPT_INDENT_2 | orjson.OPT_NON_STR_KEYS | orjson.OPT_APPEND_NEWLINE)
    except (TypeError, orjson.JSONEncodeError):
        return to_json_text(_plain(document)).encode("utf-8")
    return halve_indent(text, _depth(text))


def _plain(obj):
    """Fragments back to floats, for the standard library's encoder."""
    if type(obj) is orjson.Fragment:
        return json.loads(obj.contents)
    if isinstance(obj, dict):
        return {k: _plain(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_plain(v) for v in obj]
    return obj
