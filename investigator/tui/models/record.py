"""One record's view: the engine's explanation plus every feature's value beside its typical range.

Computed in a worker and cached, so moving through records redraws from memory.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from dataclasses import dataclass

from investigator.explain.explanation import Explanation, Typical
from investigator.output.explanation import explanation_text


@dataclass(frozen=True, slots=True)
class FeatureValue:
    """One feature of the record as the methods saw it: raw value, typical range, robust z, imputed."""

    feature: str
    value: float | str | None
    typical: Typical
    robust_z: float
    imputed: bool


@dataclass(frozen=True, slots=True)
class RecordView:
    """What the Record screen draws: the explanation, every feature's value, and the headline sentence."""

    explanation: Explanation
    values: tuple[FeatureValue, ...]
    headline: str


def record_view(result, position: int) -> RecordView:
    """``result.explain`` for the record at 0-based ``position``, with every feature's raw value, typical
    range and robust z (what the methods saw)."""
    from investigator.explain.view import raw_value

    e = result.explain(row=position + 1)
    typical = result.explainer.typical.for_record(result.features, position)  # its own category's, if any
    z = result.features.values[position]
    values = tuple(
        FeatureValue(spec.name, raw_value(result.features, position, j), typical[j], float(z[j]),
                     bool(result.features.imputed[position, j]))
        for j, spec in enumerate(result.features.specs)
    )
    return RecordView(e, values, explanation_text(e).split("\n", 1)[0])


class ViewCache:
    """Explanations by position, the most recent few hundred; one engine call at a time (the engine's
    fitted objects are not meant to be shared between threads)."""

    def __init__(self, result, size: int = 256) -> None:
        self.result = result
        self.size = size
        self._views: OrderedDict[int, RecordView] = OrderedDict()
        self._lock = threading.Lock()

    def get(self, position: int) -> RecordView | None:
        view = self._views.get(position)
        if view is not None:
            self._views.move_to_end(position)
        return view

    def compute(self, position: int) -> RecordView:
        with self._lock:
            view = self._views.get(position)
            if view is None:
                view = record_view(self.result, position)
                self._views[position] = view
                while len(self._views) > self.size:
                    self._views.popitem(last=False)
            return view
