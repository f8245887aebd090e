"""The explainer of one scan result: what explanations are computed from, and the ones already computed.

A result's explanations share three things that are costly to build: the pool of ordinary records peers
come from, the typical range of every feature among them, and the explanations of every flagged record
(which the JSON records, the report and the workspace all show). The explainer builds each once, on first
use, under a lock: the workspace asks for explanations from worker threads, and two of them must not both
build the same thing (nor see it half-built).

A model that scores records piece by piece (:mod:`investigator.pipeline.scan_model`) hands its own pool
and typical ranges in (``Explainer(result, pool=..., typical=...)``): its pieces compare with the ordinary
records of the fit, not with their own.
"""

from __future__ import annotations

import threading
from collections.abc import Mapping
from dataclasses import replace
from types import MappingProxyType
from typing import TYPE_CHECKING

import numpy as np

from investigator.explain.explanation import Explanation
from investigator.explain.typical import TypicalValues
from investigator.explain.view import Pool, build_pool, explain_positions, top_features_texts, typical_ranges

if TYPE_CHECKING:  # the result is the pipeline's; this layer only reads it
    from investigator.pipeline.result import ScanResult


class Explainer:
    """Explanations of the records of ``result``. ``pool`` and ``typical``: given when they come from
    elsewhere (a fitted model); otherwise built from the result when first needed."""

    def __init__(self, result: ScanResult, *, pool: Pool | None = None,
                 typical: TypicalValues | None = None) -> None:
        self.result = result
        self._lock = threading.RLock()  # re-entrant: building the flagged explanations builds the pool
        self._pool = pool
        self._typical = typical
        self._flagged: Mapping[int, Explanation] | None = None

    @property
    def pool(self) -> Pool:
        """The ordinary records peers and typical ranges come from."""
        with self._lock:
            if self._pool is None:
                self._pool = build_pool(self.result)
            return self._pool

    @property
    def typical(self) -> TypicalValues:
        """Per feature, what an ordinary record looks like (in the order of ``result.features``; grouped by
        category where one takes part, see :meth:`TypicalValues.of`)."""
        with self._lock:
            if self._typical is None:
                self._typical = typical_ranges(self.pool)
            return self._typical

    def explain(self, positions, peers: int = 5) -> list[Explanation]:
        """Explanations of the records at 0-based ``positions`` (computed now, not kept), with their cell
        findings (``result.cells``)."""
        positions = np.asarray(positions, dtype=int)
        found = self.result.cells.of(positions) if len(positions) else []
        # The smallest change tries the cells the findings point at first: a wrong amount is mended there,
        # not by a made-up quantity.
        explained = explain_positions(self.result, positions, self.pool, self.typical, peers=peers,
                                      prefer=[[c.column for c in cells] for cells in found])
        return [replace(e, cells=c) for e, c in zip(explained, found, strict=True)]

    def flagged(self) -> Mapping[int, Explanation]:
        """The explanations of every flagged record, by 0-based position (computed once; read-only, since
        every reader shares them)."""
        with self._lock:
            if self._flagged is None:
                positions = np.flatnonzero(self.result.flagged)
                self._flagged = MappingProxyType(dict(zip(positions.tolist(), self.explain(positions),
                                                          strict=True)))
            return self._flagged

    def top_features_texts(self, positions, limit: int = 3) -> list[str]:
        """The combined view in one line per record, from the contributions alone (the CSV/Parquet column)."""
        return top_features_texts(self.result, positions, limit=limit)
