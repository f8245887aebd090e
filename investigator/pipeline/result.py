"""The result of a scan: one object that everything downstream reads (outputs, explanations, TUI)."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from investigator.errors import InputError
from investigator.explain.view import explain_positions, top_features_texts
from investigator.io.tables import Table
from investigator.io.writers import write_result
from investigator.methods.base import Method, gaussian_scaling
from investigator.methods.column_rules import ColumnRules
from investigator.methods.neighbors import NeighborGraph, NeighborSearch
from investigator.output.summary import summary_text
from investigator.pipeline.combine import Combination, ranking
from investigator.pipeline.options import ScanOptions
from investigator.prepare.features import FeaturePreparer, Features
from investigator.prepare.roles import ColumnInfo


@dataclass
class MethodResult:
    """One method's view of every record: raw ``scores``, ``flags`` (above the cutoff), ``z`` (the z-values
    the combination averages), and per record the ``cutoff`` and ``far`` (the z-value beyond which it flags
    alone) that applied, which differ between kinds of normal (``kinds``: the per-kind calibration, or None).
    """

    key: str
    method: Method
    scores: np.ndarray
    flags: np.ndarray
    z: np.ndarray
    cutoffs: np.ndarray
    far: np.ndarray
    kinds: object | None = None  # kinds.KindCalibration

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


@dataclass
class ScanResult:
    """Everything a scan computed.

    Attributes: ``table`` (raw records), ``options``, ``columns`` (roles), ``features`` (prepared matrix),
    ``preparer`` (fitted preparation), ``neighbors`` (the shared search) and ``graph`` (each record's
    neighbours), ``methods`` (per method key: fitted method, scores, flags, unified scores),
    ``combination`` (votes, consensus, flagged), ``rules`` and ``column_hits``, ``run`` (the run record),
    ``stability`` (with ``resamples``: the share of resampled runs that flag each record).
    """

    table: Table
    options: ScanOptions
    columns: list[ColumnInfo]
    features: Features
    preparer: FeaturePreparer
    neighbors: NeighborSearch | None
    graph: NeighborGraph | None
    methods: dict[str, MethodResult]
    combination: Combination
    rules: ColumnRules
    column_hits: list[list[dict]]
    run: dict
    stability: np.ndarray | None = None  # share of resampled runs flagging each record (--resamples)
    reference: Table | None = None  # check mode: the cleaned reference the methods were fitted on
    reference_features: Features | None = None
    out_of_spec: list[list[dict]] | None = None  # with --limits: per record, the limits it breaks
    verdicts: list[str | None] | None = None  # with a review store: each record's current verdict
    notes: list[str | None] | None = None
    groups: object | None = None  # structure.groups.Grouping: small groups, large clusters, patterns
    map: np.ndarray | None = None  # n x 2 map coordinates (with --map)
    group_cases: list[dict] | None = None  # each small group as one case, with its profile
    kinds: object | None = None  # kinds.KindsOfNormal: the large clusters, each with its own fit
    _explanations: dict | None = field(default=None, init=False, repr=False)
    _typical: list | None = field(default=None, init=False, repr=False)
    _pool: object | None = field(default=None, init=False, repr=False)

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
        return self.methods[method].scores

    def flags(self, method: str) -> np.ndarray:
        return self.methods[method].flags

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

    # -- explanations --------------------------------------------------------------------------------
    def explain(self, row_or_key=None, *, row: int | None = None, key=None, peers: int = 5) -> dict:
        """Why a record stands out: contributions per method, the combined view, peers, the smallest
        change that would make it ordinary, and stability. ``row_or_key`` is the key when the scan has an
        ``id`` column, otherwise the 1-based row (which is then the key)."""
        if row is None and key is None:
            if row_or_key is None:
                raise TypeError("explain() needs a row or a key")
            key = row_or_key
        return explain_positions(self, [self.position(row=row, key=key)], peers=peers)[0]

    def explanations(self) -> dict[int, dict]:
        """Explanations of every flagged record, by 0-based position (computed once)."""
        if self._explanations is None:
            flagged = np.flatnonzero(self.flagged)
            self._explanations = dict(zip(flagged.tolist(), explain_positions(self, flagged), strict=True))
        return self._explanations

    # -- records -------------------------------------------------------------------------------------
    def record(self, i: int) -> dict:
        names = self.features.names
        explained = self.explanations().get(i)
        extra = {
            "contributions": explained["contributions"] if explained else None,
            "top_features": explained["top_features"] if explained else None,
            "peers": [{"row": p["row"], "key": p["key"]} for p in explained["peers"]["records"]]
            if explained else None,
            "nearest_ordinary": explained["nearest_ordinary"] if explained else None,
        }
        if self.stability is not None:
            extra["stability"] = _num(self.stability[i])
        if self.out_of_spec is not None:
            extra["out_of_spec"] = self.out_of_spec[i]
        if self.verdicts is not None:
            extra["verdict"], extra["note"] = self.verdicts[i], self.notes[i]
        if self.groups is not None:
            g = self.groups.record(i)
            extra.update(pattern=g["pattern"], group=g["group"], group_size=g["group_size"])
        if self.map is not None:
            extra["map"] = [float(self.map[i, 0]), float(self.map[i, 1])]
        if self.kinds is not None:
            extra["kind"] = int(self.kinds.labels[i]) + 1
        return {
            "row": int(self.table.row_numbers[i]),
            "key": self.keys[i],
            "scores": {k: _num(r.scores[i]) for k, r in self.methods.items()},
            "flags": {k: bool(r.flags[i]) for k, r in self.methods.items()},
            "rank": int(self.rank[i]),
            "consensus": _num(self.consensus[i]),
            "consensus_z": _num(self.consensus_z[i]),
            "votes": int(self.votes[i]),
            "flagged": bool(self.flagged[i]),
            "flag_reason": self.flag_reason[i] or None,
            "column_hits": self.column_hits[i],
            "imputed": [names[j] for j in np.flatnonzero(self.features.imputed[i])],
            **extra,
        }

    def records(self) -> list[dict]:
        return [self.record(i) for i in range(self.n_records)]

    def to_frame(self) -> pd.DataFrame:
        """One row per record: row, key, rank, consensus, consensus_z, votes, flagged, flag_reason,
        score_<method>, flag_<method>, ..."""
        out = {
            "row": self.table.row_numbers,
            "key": self.keys,
            "rank": self.rank,
            "consensus": self.consensus,
            "consensus_z": self.consensus_z,
            "votes": self.votes,
            "flagged": self.flagged,
            "flag_reason": list(self.flag_reason),
        }
        for k, r in self.methods.items():
            out[f"score_{k}"] = r.scores
        for k, r in self.methods.items():
            out[f"flag_{k}"] = r.flags
        out["column_hits"] = ["; ".join(f"{h['column']}: {h['rule']}" for h in hits)
                              for hits in self.column_hits]
        out["imputed"] = ["; ".join(self.features.names[j] for j in np.flatnonzero(m))
                          for m in self.features.imputed]
        flagged = np.flatnonzero(self.flagged)
        texts = np.full(self.n_records, "", dtype=object)
        texts[flagged] = top_features_texts(self, flagged)
        out["top_features"] = texts
        if self.stability is not None:
            out["stability"] = self.stability
        if self.out_of_spec is not None:
            out["out_of_spec"] = ["; ".join(f"{h['column']} {h['side']} limit" for h in hits)
                                  for hits in self.out_of_spec]
        if self.verdicts is not None:
            out["verdict"], out["note"] = self.verdicts, self.notes
        if self.map is not None:
            out["map_x"], out["map_y"] = self.map[:, 0], self.map[:, 1]
        if self.kinds is not None:
            out["kind"] = self.kinds.labels + 1
        if self.groups is not None:
            out["pattern"] = list(self.groups.pattern)
            out["group"] = [int(g) if g > 0 else None for g in self.groups.group]
        return pd.DataFrame(out)

    def to_dict(self) -> dict:
        out = {"run": self.run, "records": self.records()}
        if self.group_cases is not None:
            out["groups"] = self.group_cases
        return out

    def write(self, path: str | Path) -> Path:
        """Write the result; the format follows the extension (.json, .csv, .parquet)."""
        return write_result(self, Path(path))

    def summary(self, top: int = 10) -> str:
        return summary_text(self, top=top)


def _num(x) -> float | None:
    x = float(x)
    return x if np.isfinite(x) else None
