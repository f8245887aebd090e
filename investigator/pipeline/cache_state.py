"""A scan result as plain data and back, without pickle: arrays for an ``.npz`` file and JSON for the rest.

:func:`encode` walks the result's objects and returns the JSON-ready state and the list of arrays;
:func:`decode` builds the same objects again. What it writes is data only: numbers, text, lists, arrays of
numbers (loaded with ``allow_pickle=False``), and for each object the name of its class and its attributes.
Reading never runs code from the file: a class is looked up by name only among the program's own classes
and the few scikit-learn estimators a scan fits (``ESTIMATORS``), and only where it is defined; it is made
with ``cls.__new__`` and gets its attributes set, so no ``__init__``, ``__setstate__`` or ``__reduce__`` of a
named class is called. Three exceptions are rebuilt through their own constructors from data: scikit-learn's
tree structure (its arrays checked first, :func:`_checked_tree_state`), the neighbour index (fitted again on
its records) and a calendar of public holidays (from its country and years, by the `holidays` package).
Anything else in the result (a type the walk does not know) raises :class:`Unsupported`, and that result is
not kept.

Shared objects stay shared and cycles survive (the explainer points back at its result): every object and
array is written once and referred to by number after that. Arrays keep their read-only flag
(``methods/fitted.py``), tuples stay tuples, and floats are written as Python writes them (``repr``), which
reads back to the same bits.
"""

from __future__ import annotations

import importlib
import threading
from pathlib import Path, PurePath
from types import MappingProxyType
from typing import Any

import numpy as np

# The scikit-learn estimators a scan holds (the isolation forest and its trees; the neighbour indexes).
ESTIMATORS = frozenset({
    "sklearn.ensemble._iforest:IsolationForest",
    "sklearn.tree._classes:ExtraTreeRegressor",
})
TREE = "sklearn.tree._tree:Tree"
INDEX = "sklearn.neighbors._unsupervised:NearestNeighbors"
OWN = "investigator."
_LOCKS = (type(threading.RLock()), type(threading.Lock()))


class Unsupported(TypeError):
    """The result holds something this module cannot write as data; such a result is not kept."""


def _name(cls: type) -> str:
    return f"{cls.__module__}:{cls.__qualname__}"


def _frame_type():
    # pandas is imported by whoever built a frame; here only to recognise and rebuild one (0.6 s, already loaded
    # by then: the loader of a result that holds a frame imports it at the frame, not before).
    import pandas as pd

    return pd


class Encoder:
    """One walk over a result: ``state`` (JSON-ready) and ``arrays`` (for the .npz)."""

    def __init__(self) -> None:
        self.arrays: list[np.ndarray] = []
        self.refs: dict[int, int] = {}  # id of an object or array already written -> its number
        self.alive: list[object] = []  # keeps every numbered object alive, so no id is reused during the walk

    def number(self, obj: object) -> int:
        n = len(self.alive)
        self.refs[id(obj)] = n
        self.alive.append(obj)
        return n

    def array(self, a: np.ndarray) -> int:
        self.arrays.append(np.ascontiguousarray(a))
        return len(self.arrays) - 1

    def __call__(self, o: Any) -> Any:  # noqa: C901 - one branch per kind of value, in the order they are tried
        if o is None or o is True or o is False or type(o) is str:
            return o
        t = type(o)
        if t is int:
            return o
        if t is float:
            return o if np.isfinite(o) else {"@f": repr(o)}
        if t is list:
            return [self(x) for x in o]
        if t is tuple:
            return {"@t": [self(x) for x in o]}
        if t is dict:
            if all(type(k) is str and not k.startswith("@") for k in o):
                return {k: self(v) for k, v in o.items()}
            return {"@d": [[self(k), self(v)] for k, v in o.items()]}
        if t is set or t is frozenset:
            return {"@s" if t is set else "@fs": [self(x) for x in o]}
        if t is MappingProxyType:
            return {"@mp": self(dict(o))}
        if isinstance(o, np.generic):
            if o.dtype.hasobject:
                raise Unsupported(f"numpy object scalar {o!r}")
            return {"@g": self.array(np.asarray(o))}
        if id(o) in self.refs:
            return {"@r": self.refs[id(o)]}
        if t is np.ndarray:
            if o.dtype.hasobject:
                n = self.number(o)
                return {"@oa": n, "shape": list(o.shape), "items": [self(x) for x in o.ravel(order="C")],
                        "ro": not o.flags.writeable}
            return {"@a": self.array(o), "n": self.number(o), "ro": not o.flags.writeable}
        if isinstance(o, np.dtype):
            if o.fields is not None or o.hasobject:
                raise Unsupported(f"numpy dtype {o!r}")
            return {"@dtype": o.str}
        if isinstance(o, type):
            if issubclass(o, np.generic) and not issubclass(o, np.object_):
                return {"@type": np.dtype(o).str}
            raise Unsupported(f"class {o!r}")
        if isinstance(o, PurePath):
            return {"@p": str(o)}
        if t.__module__.partition(".")[0] == "holidays":  # a calendar of public holidays: rebuilt from its name
            return {"@holidays": str(o.country), "subdiv": o.subdiv, "years": sorted(int(y) for y in o.years)}
        if isinstance(o, list | tuple | dict | set | frozenset | int | float | str):
            raise Unsupported(f"a {t.__name__}")  # a named tuple, an enumeration, ...: not plain data
        if isinstance(o, _LOCKS):
            return {"@lock": True}  # a fresh lock on reading: a lock holds no state worth keeping
        name = _name(t)
        if t.__module__.partition(".")[0] == "pandas":
            return self.frame(o)
        if name == TREE:
            return self.tree(o)
        if name == INDEX:
            return {"@index": self.number(o), "params": self(o.get_params()), "X": self(o._fit_X)}
        if not (name.startswith(OWN) or name in ESTIMATORS):
            raise Unsupported(f"an object of class {name}")
        n = self.number(o)
        state: dict[str, Any] = {}
        for k, v in getattr(o, "__dict__", {}).items():
            state[k] = self(v)
        for cls in t.__mro__:
            for k in cls.__dict__.get("__slots__", ()):
                if k not in ("__dict__", "__weakref__") and hasattr(o, k):
                    state[k] = self(getattr(o, k))
        return {"@o": name, "n": n, "s": state}

    def frame(self, o: Any) -> dict:
        pd = _frame_type()
        if type(o) is not pd.DataFrame:
            raise Unsupported(f"a pandas {type(o).__name__}")
        if not isinstance(o.index, pd.RangeIndex) or o.index.start != 0 or o.index.step != 1:
            raise Unsupported("a data frame with an index of its own")
        n = self.number(o)
        columns = []
        for j in range(o.shape[1]):
            col = o.iloc[:, j]
            if not isinstance(col.dtype, np.dtype):  # pandas' own types: text, nullable numbers, ...
                columns.append(self.extension_column(col))
                continue
            values = col.to_numpy()
            if values.dtype.hasobject:
                items = []
                for x in values.tolist():
                    if x is None or type(x) in (str, int, float, bool):
                        items.append(self(x))
                    else:  # timestamps and other objects pandas read: not kept
                        raise Unsupported(f"a cell of type {type(x).__name__}")
                columns.append({"object": items})
            else:
                columns.append({"array": self.array(values)})
        return {"@frame": n, "columns": self(list(o.columns)), "values": columns, "attrs": self(dict(o.attrs))}

    def extension_column(self, col: Any) -> dict:
        """A column of one of pandas' own types that its name gives back (text, nullable integers and
        booleans): the values as plain data, missing ones as null. Others (categories, time zones) are not kept."""
        pd = _frame_type()
        name = str(col.dtype)
        try:
            same = pd.api.types.pandas_dtype(name) == col.dtype
        except TypeError:
            same = False
        if not same:
            raise Unsupported(f"a column of type {name}")
        missing = col.isna().to_numpy()
        items: list[Any] = []
        for x, gone in zip(col.to_numpy(dtype=object).tolist(), missing.tolist(), strict=True):
            if gone:
                items.append(None)
            elif type(x) in (str, int, float, bool):
                items.append(self(x))
            else:
                raise Unsupported(f"a cell of type {type(x).__name__}")
        return {"extension": name, "items": items}

    def tree(self, o: Any) -> dict:
        cls, args, state = o.__reduce__()
        if _name(cls) != TREE:
            raise Unsupported("a tree of another kind")
        return {"@tree": self.number(o), "args": self(tuple(args)), "state": self(state)}


def encode(result: object) -> tuple[Any, list[np.ndarray]]:
    """The state of ``result`` (JSON-ready) and its arrays; raises :class:`Unsupported`."""
    enc = Encoder()
    return enc(result), enc.arrays


def _class(name: str) -> type:
    module, _, qualname = name.partition(":")
    if not (module.startswith(OWN) or name in ESTIMATORS or name in (TREE, INDEX)) or "<" in qualname:
        raise ValueError(f"class {name} is not one a scan holds")
    obj: Any = importlib.import_module(module)
    for part in qualname.split("."):
        obj = getattr(obj, part)
    if not isinstance(obj, type) or _name(obj) != name:  # defined there: not reached through another module
        raise ValueError(f"{name} is not a class a scan holds")
    return obj


def _checked_tree_state(state: dict, n_features: int) -> dict:
    """A decision tree's arrays as its compiled code may use them: the code does not check its indices, so
    every child must be a later node (or -1, a leaf) and every split feature one of the features (or -2)."""
    nodes = state["nodes"]
    count = int(state["node_count"])
    if not isinstance(nodes, np.ndarray) or nodes.ndim != 1 or len(nodes) != count or count < 1:
        raise ValueError("a tree whose nodes do not match its node count")
    own = np.arange(count)
    for child in ("left_child", "right_child"):
        c = nodes[child]
        if not np.all((c == -1) | ((c > own) & (c < count))):
            raise ValueError("a tree with a child outside it")
    leaf = nodes["left_child"] == -1
    if not np.array_equal(leaf, nodes["right_child"] == -1):
        raise ValueError("a tree with a node of one child")
    f = nodes["feature"]
    if not (np.all((f[~leaf] >= 0) & (f[~leaf] < n_features))):
        raise ValueError("a tree splitting on a feature it does not have")
    values = state["values"]
    if not isinstance(values, np.ndarray) or values.ndim != 3 or values.shape[0] != count:
        raise ValueError("a tree whose values do not match its nodes")
    return state


class Decoder:
    def __init__(self, arrays) -> None:
        self.arrays = arrays  # a mapping "a<number>" -> array (an open .npz)
        self.objects: dict[int, Any] = {}

    def array(self, i: int) -> np.ndarray:
        a = self.arrays[f"a{i}"]
        if a.dtype.hasobject:
            raise ValueError("an array of objects")
        return a

    def __call__(self, o: Any) -> Any:  # noqa: C901 - the counterpart of Encoder.__call__
        if o is None or isinstance(o, bool | str | int | float):
            return o
        if isinstance(o, list):
            return [self(x) for x in o]
        if not isinstance(o, dict):
            raise ValueError(f"unexpected {type(o).__name__} in the state")
        if not o or not next(iter(o)).startswith("@"):
            return {k: self(v) for k, v in o.items()}
        tag = next(iter(o))
        if tag == "@f":
            return float(o["@f"])
        if tag == "@t":
            return tuple(self(x) for x in o["@t"])
        if tag == "@d":
            return {self(k): self(v) for k, v in o["@d"]}
        if tag == "@s":
            return {self(x) for x in o["@s"]}
        if tag == "@fs":
            return frozenset(self(x) for x in o["@fs"])
        if tag == "@mp":
            return MappingProxyType(self(o["@mp"]))
        if tag == "@g":
            return self.array(o["@g"])[()]
        if tag == "@r":
            return self.objects[o["@r"]]
        if tag == "@a":
            a = self.array(o["@a"])
            if o["ro"]:
                a.flags.writeable = False
            self.objects[o["n"]] = a
            return a
        if tag == "@oa":
            a = np.empty(len(o["items"]), dtype=object)
            self.objects[o["@oa"]] = a
            a[:] = [self(x) for x in o["items"]]
            a = a.reshape(o["shape"])
            self.objects[o["@oa"]] = a
            if o["ro"]:
                a.flags.writeable = False
            return a
        if tag == "@dtype":
            return np.dtype(o["@dtype"])
        if tag == "@type":
            return np.dtype(o["@type"]).type
        if tag == "@p":
            return Path(o["@p"])
        if tag == "@lock":
            return threading.RLock()
        if tag == "@holidays":
            # Deferred, as in prepare/calendar.py (0.27 s, `python -X importtime -c "import holidays"`): only a
            # scan that asked for holidays holds a calendar.
            import holidays

            return holidays.country_holidays(o["@holidays"], subdiv=o["subdiv"], years=o["years"])
        if tag == "@frame":
            return self.frame(o)
        if tag == "@tree":
            cls = _class(TREE)
            args = self(o["args"])
            n_features, n_classes, n_outputs = int(args[0]), np.asarray(args[1], dtype=np.intp), int(args[2])
            if n_features < 1 or n_outputs != 1 or n_classes.shape != (1,):  # a regression tree, one output
                raise ValueError("a tree of another shape")
            tree = cls(n_features, n_classes, n_outputs)
            tree.__setstate__(_checked_tree_state(self(o["state"]), n_features))
            self.objects[o["@tree"]] = tree
            return tree
        if tag == "@index":
            cls = _class(INDEX)
            index = cls(**self(o["params"]))
            self.objects[o["@index"]] = index
            index.fit(self(o["X"]))
            return index
        if tag == "@o":
            made: Any = _class(o["@o"])
            obj = made.__new__(made)
            self.objects[o["n"]] = obj
            for k, v in o["s"].items():
                object.__setattr__(obj, k, self(v))
            return obj
        raise ValueError(f"unknown entry {tag} in the state")

    def frame(self, o: dict) -> Any:
        pd = _frame_type()
        data = {}
        names = self(o["columns"])
        for j, col in enumerate(o["values"]):
            if "extension" in col:
                values = pd.array([self(x) for x in col["items"]], dtype=pd.api.types.pandas_dtype(col["extension"]))
            elif "object" in col:
                values = np.empty(len(col["object"]), dtype=object)
                values[:] = [self(x) for x in col["object"]]
            else:
                values = self.array(col["array"])
            data[j] = values
        frame = pd.DataFrame(data, copy=False)
        frame.columns = names
        frame.attrs.update(self(o["attrs"]))
        self.objects[o["@frame"]] = frame
        return frame


def decode(state: Any, arrays) -> Any:
    """The object :func:`encode` described; ``arrays``: the .npz's arrays by name (``a0``, ``a1``, ...)."""
    return Decoder(arrays)(state)
