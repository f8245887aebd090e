"""One record's view: the engine's explanation plus every feature's value beside its typical range.

Computed in a worker and cached, so moving through records redraws from memory.
"""

from __future__ import annotations

import threading
from collections import OrderedDict

from investigator.output.explanation import explanation_text


def record_view(result, position: int) -> dict:
    """``result.explain`` for the record at 0-based ``position``, with ``values``: every feature's raw value,
    typical range and robust z (what the methods saw)."""
    # Deferred: the explainer imports pandas (0.6 s), and the app imports this module before its first frame.
    from investigator.explain.view import raw_value, typical_ranges

    e = result.explain(row=position + 1)
    typical = typical_ranges(result)
    z = result.features.values[position]
    e["values"] = [
        {"feature": spec.name, "value": raw_value(result.features, position, j), "typical": typical[j],
         "robust_z": float(z[j]), "imputed": bool(result.features.imputed[position, j])}
        for j, spec in enumerate(result.features.specs)
    ]
    e["headline"] = explanation_text(e).split("\n", 1)[0]
    return e


class ViewCache:
    """Explanations by position, the most recent few hundred; one engine call at a time (the engine's
    fitted objects are not meant to be shared between threads)."""

    def __init__(self, result, size: int = 256) -> None:
        self.result = result
        self.size = size
        self._views: OrderedDict[int, dict] = OrderedDict()
        self._lock = threading.Lock()

    def get(self, position: int) -> dict | None:
        view = self._views.get(position)
        if view is not None:
            self._views.move_to_end(position)
        return view

    def compute(self, position: int) -> dict:
        with self._lock:
            view = self._views.get(position)
            if view is None:
                view = record_view(self.result, position)
                self._views[position] = view
                while len(self._views) > self.size:
                    self._views.popitem(last=False)
            return view
