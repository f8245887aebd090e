"""A fitted object's whole state, recorded so a test can check that scoring left it exactly as it was.

:func:`snapshot` walks an object's attributes (``vars``), the items of its lists, tuples and dicts, and
the pickled state of objects that keep it outside ``vars`` (a scikit-learn tree, a KD-tree), and records every leaf
under its path: each array by a copy of its values, its identity and whether it is writeable, every other
object reached through an attribute or a container by its identity, and plain values by their ``repr``
(exact for floats). :func:`changes` lists the paths where two snapshots differ; an empty list means
nothing was reassigned, replaced, added, removed or written in place.
"""

from __future__ import annotations

import types

import numpy as np
import pandas as pd

_PLAIN = (type(None), bool, int, float, complex, str, bytes, np.generic, np.dtype)
_CODE = (type, types.FunctionType, types.BuiltinFunctionType, types.MethodType, types.ModuleType)


def snapshot(obj, path: str = "obj") -> dict[str, tuple]:
    out: dict[str, tuple] = {}
    _walk(obj, path, out, {}, True)
    return out


def _walk(obj, path: str, out: dict, seen: dict, identity: bool) -> None:
    # ``identity``: False below a pickled state, which is built anew on every call (only values compare).
    if isinstance(obj, _PLAIN):
        out[path] = ("value", type(obj).__name__, repr(obj))
        return
    if isinstance(obj, np.ndarray):
        out[path] = ("array", id(obj) if identity else None, obj.flags.writeable, obj.dtype.str, obj.shape,
                     obj.copy())
        return
    if id(obj) in seen and identity:  # a second reference to an object already recorded (or a cycle)
        out[path] = ("same as", seen[id(obj)])
        return
    if identity:
        seen[id(obj)] = path
    mark = (id(obj),) if identity else ()
    if isinstance(obj, pd.DataFrame | pd.Series | pd.Index):
        out[path] = ("pandas", *mark, obj.copy())
        return
    if isinstance(obj, list | tuple):
        out[path] = (type(obj).__name__, *mark, len(obj))
        for i, item in enumerate(obj):
            _walk(item, f"{path}[{i}]", out, seen, identity)
        return
    if isinstance(obj, dict):
        out[path] = ("dict", *mark, len(obj))
        for key in sorted(obj, key=repr):
            _walk(obj[key], f"{path}[{key!r}]", out, seen, identity)
        return
    if isinstance(obj, set | frozenset):
        out[path] = (type(obj).__name__, *mark, sorted(map(repr, obj)))
        return
    if isinstance(obj, _CODE):
        out[path] = ("code", repr(obj))
        return
    if getattr(obj, "__dict__", None):
        out[path] = ("object", type(obj).__name__, *mark)
        for name, value in vars(obj).items():
            _walk(value, f"{path}.{name}", out, seen, identity)
        return
    try:
        state = obj.__reduce_ex__(4)  # a C extension type: what pickling it would record
    except TypeError:
        out[path] = ("object", type(obj).__name__, *mark, repr(obj))
        return
    out[path] = ("state", type(obj).__name__, *mark)
    state = state[2] if len(state) > 2 and state[2] is not None else state[1]
    if hasattr(obj, "get_tree_stats") and hasattr(obj, "get_n_calls"):
        state = _without_counters(obj, state)
    _walk(state, f"{path}<state>", out, seen, False)


def _without_counters(tree, state: tuple) -> tuple:
    """A scikit-learn KD-tree's state without the work counters every query adds to (its
    ``get_tree_stats()``: trims, leaves, splits, and ``get_n_calls()``: distance calls; positions 7-10 of
    its pickled state). They describe the queries run so far, no result reads them, and they are the one
    thing a query changes in the tree; everything else must stay as fitted."""
    counters = (*tree.get_tree_stats(), tree.get_n_calls())
    assert tuple(state[7:11]) == counters, "the KD-tree's pickled state has another layout: update fitted_state.py"
    return (*state[:7], "work counters, not compared", *state[11:])


def _same(a: tuple, b: tuple) -> bool:
    if a[0] != b[0] or len(a) != len(b):
        return False
    if a[0] == "array":
        return a[:-1] == b[:-1] and _equal(a[-1], b[-1])
    if a[0] == "pandas":
        return a[:-1] == b[:-1] and a[-1].equals(b[-1])
    return a == b


def _equal(x: np.ndarray, y: np.ndarray) -> bool:
    if x.dtype.names:  # records (a tree's nodes): field by field, since padding bytes hold anything
        return all(_equal(x[name], y[name]) for name in x.dtype.names)
    if x.dtype.kind in "fc":
        return bool(np.array_equal(x, y, equal_nan=True))
    if x.dtype.kind == "O":
        return x.tolist() == y.tolist()
    return x.tobytes() == y.tobytes()


def changes(before: dict[str, tuple], after: dict[str, tuple]) -> list[str]:
    """Paths whose leaf differs between the snapshots, or that one of them lacks."""
    out = [f"{p}: {'added' if p not in before else 'removed'}" for p in sorted(set(before) ^ set(after))]
    for p in sorted(set(before) & set(after)):
        if not _same(before[p], after[p]):
            out.append(f"{p}: {before[p][:-1] if before[p][0] == 'array' else before[p]} -> "
                       f"{after[p][:-1] if after[p][0] == 'array' else after[p]}")
    return out
