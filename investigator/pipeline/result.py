"""The result of a scan: one object that everything downstream reads (outputs, explanations, TUI).

It holds the data: the records, the prepared features, every method's result, the combination, the run
record and the groups. Its explanations come from ``result.explainer``
(:class:`investigator.explain.explainer.Explainer`), and its serialisation (records as dicts, the frame, the
JSON, writing files) from :mod:`investigator.output.records`; the methods here that do either only hand on.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from investigator.errors import InputError
from investigator.explain.cells import CellFinder
from investigator.explain.explainer import Explainer
from investigator.explain.explanation import Explanation
from investigator.io.tables import Table
from investigator.methods.base import Method, gaussian_scaling
from investigator.methods.column_rules import ColumnRules
from investigator.methods.neighbors import NeighborGraph, NeighborSearch
from investigator.output.records import write_result
from investigator.output.summary import summary_text
from investigator.pipeline.combine import Combination, ranking
from investigator.pipeline.options import ScanOptions
from investigator.pipeline.run_record import RunRecord
from investigator.prepare.features import FeaturePreparer, Features
from investigator.prepare.roles import ColumnInfo
from investigator.structure.cases import GroupCase
from investigator.structure.groups import Grouping
from investigator.structure.kinds import KindCalibration, KindsOfNormal

if TYPE_CHECKING:
    import pandas as pd

    from investigator.pipeline.priority import Learning
    from investigator.pipeline.within import PeerGroups

if TYPE_CHECKING:
    from investigator.structure.groups import Grouping
    from investigator.structure.kinds import KindCalibration, KindsOfNormal


@dataclass
class MethodResult:
    """One method's view of every record: raw ``scores``, ``flags`` (above the cutoff), ``z`` (the z-values
    the combination averages), and per record the ``cutoff`` and ``far`` (the z-value beyond which it flags
    alone) that applied, which differ between kinds of normal (``calibration``: the per-kind calibration,
    or None).
    """

    key: str
    method: Method
    scores: np.ndarray
    flags: np.ndarray
    z: np.ndarray
    cutoffs: np.ndarray
    far: np.ndarray
    calibration: KindCalibration | None = None

    @classmethod
    def overall(cls, method: Method, scores: np.ndarray) -> MethodResult:
        """The result under the method's own (overall) calibration."""
        n = len(scores)
        return cls(method.key, method, scores, method.flags(scores), method.standardise(scores),
                   np.full(n, method.cutoff_), np.full(n, method.scale_.far))

    @property
    def unified(self) -> np.ndarray:
        """Scores on the common [0, 1] scale (Kriegel et al. 2011 Gaussian scaling of z)."""
        return gaussian_scaling(self.z)

    @property
    def far_beyond(self) -> np.ndarray:
        return self.z > self.far


@dataclass(eq=False)
class ScanResult:
    """Everything a scan computed.

    Attributes: ``table`` (raw records), ``options``, ``columns`` (roles), ``features`` (prepared matrix),
    ``preparer`` (fitted preparation), ``neighbors`` (the shared search) and ``graph`` (each record's
    neighbours), ``method_results`` (per method key: fitted method, scores, flags, z-values),
    ``combination`` (votes, consensus, flagged), ``rules`` and ``column_hits``, ``run`` (the run record),
    ``stability`` (with ``resamples``: the share of resampled runs that flag each record),
    ``explainer`` (explanations, built on first use) and ``cells`` (cell findings: which values of a record
    deviate from what its other values predict; fitted on first use); with ``within``, ``within`` (each
    record judged within its segment: :class:`investigator.pipeline.within.PeerGroups`).
    """

    table: Table
    options: ScanOptions
    columns: list[ColumnInfo]
    features: Features
    preparer: FeaturePreparer
    neighbors: NeighborSearch | None
    graph: NeighborGraph | None
    method_results: dict[str, MethodResult]
    combination: Combination
    rules: ColumnRules
    column_hits: list[list[dict]]
    run: RunRecord
    stability: np.ndarray | None = None  # share of resampled runs flagging each record (--resamples)
    reference: Table | None = None  # check mode: the cleaned reference the methods were fitted on
    reference_features: Features | None = None
    out_of_spec: list[list[dict]] | None = None  # with --limits: per record, the limits it breaks
    verdicts: list[str | None] | None = None  # with a review store: each record's current verdict
    notes: list[str | None] | None = None
    groups: Grouping | None = None  # small groups, large clusters, patterns
    map: np.ndarray | None = None  # n x 2 map coordinates (with --map)
    group_cases: list[GroupCase] | None = None  # each small group as one case, with its profile
    kinds: KindsOfNormal | None = None  # the large clusters, each with its own fit
    within: PeerGroups | None = None  # with ``within``: every record judged within its segment too
    learning: Learning | None = None  # with verdicts in the store: the priority learned from them (priority.py)
    explainer: Explainer = field(init=False, repr=False)
    cells: CellFinder = field(init=False, repr=False)

    def __post_init__(self) -> None:
        self.explainer = Explainer(self)
        self.cells = CellFinder(self)

    # -- plain arrays --------------------------------------------------------------------------------
    @property
    def n_records(self) -> int:
        return self.table.n_rows

    @property
    def consensus(self) -> np.ndarray:
        return self.combination.consensus

    @property
    def votes(self) -> np.ndarray:
        return self.combination.votes

    @property
    def rank(self) -> np.ndarray:
        """1 = most unusual; records with the same combined evidence (exact copies) share a rank."""
        return self.combination.rank

    @property
    def consensus_z(self) -> np.ndarray:
        """The combined evidence the records are ordered by (trimmed mean of the methods' z-values)."""
        return self.combination.z

    @property
    def flag_reason(self) -> np.ndarray:
        """Per record: "votes", "far beyond <method>", "top share", or "" when not flagged."""
        return self.combination.reason

    @property
    def flagged(self) -> np.ndarray:
        return self.combination.flagged

    @property
    def keys(self) -> list:
        return self.table.keys

    def scores(self, method: str) -> np.ndarray:
        return self.method_results[method].scores

    def flags(self, method: str) -> np.ndarray:
        return self.method_results[method].flags

    def ranking(self) -> np.ndarray:
        """Record positions (0-based) ordered by consensus, highest first; ties keep file order."""
        return ranking(self.combination.z)

    def position(self, row: int | None = None, key=None) -> int:
        """0-based position of a record given its 1-based ``row`` or its ``key``."""
        if row is not None:
            if not 1 <= int(row) <= self.n_records:
                raise InputError(f"row={row} is out of range; rows run from 1 to {self.n_records}",
                                 parameters=("row",))
            return int(row) - 1
        keys = [str(k) for k in self.keys]
        if str(key) not in keys:
            raise InputError(f"key='{key}' not found in {self.table.name}", parameters=("key",))
        return keys.index(str(key))

    # -- explanations (``explainer``) ----------------------------------------------------------------
    def explain(self, row_or_key=None, *, row: int | None = None, key=None, peers: int = 5) -> Explanation:
        """Why a record stands out: contributions per method, the combined view, peers, the smallest
        change that would make it ordinary, and stability. ``row_or_key`` is the key when the scan has an
        ``id`` column, otherwise the 1-based row (which is then the key). ``.to_dict()`` gives the JSON form."""
        if row is None and key is None:
            if row_or_key is None:
                raise TypeError("explain() needs a row or a key")
            key = row_or_key
        i = self.position(row=row, key=key)
        explained = self.explainer.explain([i], peers=peers)[0]
        if self.within is not None:  # peer groups: the record as its own segment judges it, too
            explained = replace(explained, within=self.within.view(i))
        return explained

    # -- serialisation (investigator.output.records) -------------------------------------------------
    def record(self, i: int) -> dict:
        """The record at 0-based position ``i`` as in the JSON output."""
        from investigator.output.records import record

        return record(self, i)

    def records(self) -> list[dict]:
        from investigator.output.records import records

        return records(self)

    def to_frame(self, columns: Sequence[str] | str | None = None) -> pd.DataFrame:
        """One row per record, the CSV/Parquet columns (docs/output.md): the result columns, then the input
        columns (``columns``: all by default, ``()`` for none, or those named)."""
        from investigator.output.records import to_frame

        return to_frame(self, columns)

    def to_dict(self) -> dict:
        """The JSON output: run record, records and groups."""
        from investigator.output.records import to_dict

        return to_dict(self)

    def write(self, path: str | Path, *, columns: Sequence[str] | str | None = None,
              where: str | None = None) -> Path:
        """Write the result; the format follows the extension (.json, .csv, .parquet). ``columns``: the input
        columns after the result columns of .csv and .parquet (all by default, ``()`` for none); ``where``: an
        SQL WHERE condition on those columns, ``"amount > 5000 AND vendor = 'Q17'"``: only the records it
        holds for are written."""
        return write_result(self, Path(path), columns=columns, where=where)

    def summary(self, top: int = 10) -> str:
        return summary_text(self, top=top)
