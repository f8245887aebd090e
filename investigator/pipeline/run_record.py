"""The run record: what a scan read, how it prepared and scored the records, and what it noticed.

:class:`RunRecord` is ``ScanResult.run``, read by attribute everywhere (the summary, the report, the
workspace, the Dask path); ``to_dict()`` is the JSON's ``run`` (docs/output.md), key for key and in the same
order. :class:`DatasetRunRecord` is the same for a Dask scan (its ``_run.json``).

Sections that describe something fixed are typed; sections whose content is open-ended (the options, each
method's parameters, the screens' reports, the group rules) are typed fields holding the dict the part that
made them describes itself with. The columns and features are the scan's own :class:`ColumnInfo` and
:class:`FeatureSpec` objects, copied when the record is made so that it cannot change afterwards.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

from investigator.prepare.features import FeatureSpec
from investigator.prepare.roles import ColumnInfo


def _present(record) -> dict:
    """The fields of a record that are set (None means absent in the JSON), in field order."""
    return {f.name: getattr(record, f.name) for f in dataclasses.fields(record)
            if getattr(record, f.name) is not None}


@dataclass(frozen=True, slots=True)
class InputRecord:
    """Where the records came from: the source (path, format, digest, how text was read), and how many
    records and columns it has and what keys them. Absent values (None) are left out of ``to_dict()``."""

    path: str | None = None
    format: str | None = None
    sha256: str | None = None
    encoding: str | None = None
    delimiter: str | None = None
    sheet: str | None = None
    decimal: str | None = None  # "," when numbers were read with a decimal comma
    header_row: int | None = None  # the row of the column names, when not the first
    files: int | None = None  # a Parquet dataset (Dask): its files and partitions
    partitions: int | None = None
    rows: int | None = None
    columns: int | None = None
    key: str | None = None  # the --id column, or "row"

    def to_dict(self) -> dict:
        return _present(self)


@dataclass(frozen=True, slots=True)
class NeighborRecord:
    """The shared neighbour search: exact or sampled, k, metric, distinct locations; when sampled, the
    reference sample's size and the size it switches on above."""

    search: str
    k: int
    metric: str
    distinct_locations: int
    reference_sample: int | None = None
    sample_above: int | None = None

    def to_dict(self) -> dict:
        return _present(self)


@dataclass(frozen=True, slots=True)
class MethodFit:
    """How one method was set up and calibrated: its parameters (open-ended, per method), the overall
    cutoff in score units and its rule in words, the far-beyond z-value, and what the score is."""

    parameters: dict
    cutoff: float
    cutoff_rule: str
    far_beyond_z: float
    score: str

    def to_dict(self) -> dict:
        return {"parameters": self.parameters, "cutoff": self.cutoff, "cutoff_rule": self.cutoff_rule,
                "far_beyond_z": self.far_beyond_z, "score": self.score}


@dataclass(frozen=True, slots=True)
class KindsRecord:
    """The kinds of normal: how they were found (``parameters``: method, large_cluster_size, sample,
    rounds, bic_kinds, bic_one, merged), their sizes, and per method key each kind's cutoff and
    far-beyond z-value."""

    parameters: dict
    sizes: list[int]
    cutoffs: dict[str, list[float]]
    far_beyond_z: dict[str, list[float]]

    def to_dict(self) -> dict:
        return {**self.parameters, "sizes": self.sizes, "cutoffs": self.cutoffs, "far_beyond_z": self.far_beyond_z}


@dataclass(frozen=True, slots=True)
class RecordRef:
    """A record named by its 1-based row and its key."""

    row: int
    key: object

    def to_dict(self) -> dict:
        return {"row": self.row, "key": self.key}


@dataclass(frozen=True, slots=True)
class PhaseOneRecord:
    """Phase I cleaning of a reference: the robust fit it used, how many records it left out, the records
    it flagged, and its cutoff (None when the cleaning was skipped)."""

    method: str
    excluded: int
    records: tuple[RecordRef, ...]
    cutoff: float | None = None

    def to_dict(self) -> dict:
        out = {"method": self.method, "excluded": self.excluded, "records": [r.to_dict() for r in self.records]}
        if self.cutoff is not None:
            out["cutoff"] = self.cutoff
        return out


@dataclass(frozen=True, slots=True)
class ReferenceRecord:
    """The reference of a check: where it came from, how many records were used, the columns the new
    records have or lack beside it, its phase I cleaning, and levels it never has (column -> level -> count)."""

    input: InputRecord
    used: int
    extra_columns: list[str]
    missing_columns: list[str]
    phase_i: PhaseOneRecord
    unseen_levels: dict[str, dict[str, int]]

    def to_dict(self) -> dict:
        return {"input": self.input.to_dict(), "used": self.used, "extra_columns": self.extra_columns,
                "missing_columns": self.missing_columns, "phase_i": self.phase_i.to_dict(),
                "unseen_levels": self.unseen_levels}


@dataclass(frozen=True, slots=True)
class Approximation:
    """One part that samples on large data: what it does, the size it switches on above, whether this
    scan used it, and whether ``--exact`` turns it off."""

    part: str
    approximation: str
    above: int
    used: bool
    exact_turns_off: bool

    def to_dict(self) -> dict:
        return {"part": self.part, "approximation": self.approximation, "above": self.above, "used": self.used,
                "exact_turns_off": self.exact_turns_off}


@dataclass(frozen=True, slots=True)
class MapRecord:
    """The 2-D map: the method that made it, its parameters (open-ended, per method) and its notices."""

    method: str
    parameters: dict
    notices: tuple[str, ...]

    def to_dict(self) -> dict:
        return {"method": self.method, **self.parameters, "notices": list(self.notices)}


@dataclass(frozen=True, slots=True)
class RunRecord:
    """The run record of one scan (docs/output.md, ``run``). ``method_fits`` is the JSON's ``methods``
    (per method key, its :class:`MethodFit`)."""

    started: str
    input: InputRecord
    columns: tuple[ColumnInfo, ...]
    features: tuple[FeatureSpec, ...]
    parameters: dict  # every scan option, as ScanOptions.as_dict()
    seed: int
    versions: dict[str, str]
    neighbors: NeighborRecord | None
    method_fits: dict[str, MethodFit]
    column_rules: dict[str, str]  # rule key -> the rule in words
    rule: str
    flagged: int
    notices: tuple[str, ...]
    approximations: tuple[Approximation, ...]
    screens: dict | None  # benford, exact_duplicates, duplicates: each check's own report
    kinds: KindsRecord | None = None
    reference: ReferenceRecord | None = None
    structure: dict | None = None  # the group rules' parameters, every group and large cluster, notices
    map: MapRecord | None = None
    within: dict | None = None  # peer groups (--within): the columns, the line, every segment and where it was scored
    review_store: str | None = None
    calendar: dict | None = None  # the date columns' calendar parts, durations, working hours, holidays
    learning: dict | None = None  # the priority learned from verdicts: verdicts used, the model's parameters

    def __post_init__(self) -> None:
        # Copies: the scan's own objects could otherwise change the record after the fact.
        object.__setattr__(self, "columns", tuple(dataclasses.replace(c) for c in self.columns))
        object.__setattr__(self, "features", tuple(dataclasses.replace(s) for s in self.features))
        object.__setattr__(self, "notices", tuple(self.notices))

    @property
    def methods(self) -> list[str]:
        """The keys of the methods that ran, in order."""
        return list(self.method_fits)

    def to_dict(self) -> dict:
        out = {
            "started": self.started,
            "input": self.input.to_dict(),
            "columns": [c.as_dict() for c in self.columns],
            "features": [s.as_dict() for s in self.features],
            "parameters": self.parameters,
            "seed": self.seed,
            "versions": self.versions,
            "neighbors": None if self.neighbors is None else self.neighbors.to_dict(),
            "methods": {k: m.to_dict() for k, m in self.method_fits.items()},
            "column_rules": self.column_rules,
            "rule": self.rule,
            "flagged": self.flagged,
            "notices": list(self.notices),
        }
        if self.calendar is not None:
            out["calendar"] = self.calendar
        if self.kinds is not None:
            out["kinds"] = self.kinds.to_dict()
        if self.reference is not None:
            out["reference"] = self.reference.to_dict()
        out["approximations"] = [a.to_dict() for a in self.approximations]
        out["screens"] = self.screens
        if self.structure is not None:
            out["structure"] = self.structure
        if self.map is not None:
            out["map"] = self.map.to_dict()
        if self.within is not None:
            out["within"] = self.within
        if self.review_store is not None:
            out["review_store"] = self.review_store
        if self.learning is not None:
            out["learning"] = self.learning
        return out


# The sections of the fit sample's run record that describe a Dask scan's fit (its _run.json keeps them).
FITTED_SECTIONS = ("columns", "features", "parameters", "seed", "versions", "neighbors", "methods", "column_rules",
                   "rule", "notices", "approximations", "kinds")


@dataclass(frozen=True, slots=True)
class SampleFit:
    """What a Dask scan was fitted on: the sample's size, of how many records, how many were asked for,
    how they were drawn, what was fitted on them, and the groups among them (``structure``)."""

    sample: int
    of: int
    asked: int
    structure_of_the_sample: dict | None
    drawn: str = "uniformly without replacement across all records, seed [seed, 19]"
    fitted_on_the_sample: str = ("preparation, neighbour reference, MCD, isolation forest, local densities, "
                                 "every method's cutoff and scale, kinds of normal, column-rule limits, "
                                 "the contamination threshold, the peer pool")

    def to_dict(self) -> dict:
        return {"sample": self.sample, "of": self.of, "asked": self.asked, "drawn": self.drawn,
                "fitted_on_the_sample": self.fitted_on_the_sample,
                "structure_of_the_sample": self.structure_of_the_sample}


@dataclass(frozen=True, slots=True)
class DatasetRunRecord:
    """The run record of a Dask scan (``FOLDER/_run.json``): the cluster, the dataset, the fit sample, the
    fit's own run record (``fitted``: columns, features, methods, rule, notices, ... as for a scan), the
    counts over all partitions and the output folder."""

    started: str
    cluster: dict  # scheduler, and for a local cluster its workers and their memory
    input: InputRecord
    fit: SampleFit
    fitted: RunRecord
    flagged: int
    flags_by_method: dict[str, int]
    output: dict  # folder, format, files
    dask_version: str

    def to_dict(self) -> dict:
        fitted = self.fitted.to_dict()
        out = {
            "started": self.started,
            "engine": "dask",
            "cluster": self.cluster,
            "input": self.input.to_dict(),
            "fit": self.fit.to_dict(),
            **{k: fitted[k] for k in FITTED_SECTIONS if k in fitted},
            "flagged": self.flagged,
            "flags_by_method": self.flags_by_method,
            "output": self.output,
        }
        out["versions"] = {**out.get("versions", {}), "dask": self.dask_version}
        return out
