"""A scan fitted on some records and applied to any others, piece by piece: the partitioned (Dask) path.

:meth:`ScanModel.fit` runs the ordinary in-memory scan on a sample of a dataset and keeps what scoring
needs: the preparation, the neighbour reference sample and its search index, every fitted method with its
cutoff and scale, the kinds of normal, the column rules, and the pool of ordinary sample records that
explanations compare with. :meth:`ScanModel.score` applies it to a block of records (a partition) whose
place in the dataset is known, so a record that is in the neighbour reference is never its own
neighbour, exactly as in a plain scan. Scoring one block never looks at another, which is what lets
``dask.dataframe.map_partitions`` run the blocks in parallel on any number of workers.

Fitted on the sample (the docs list these): the preparation (medians, MADs, log decisions, category
rarities), the neighbour reference (drawn from the sample), the MCD, the isolation forest, the local
densities of the reference, every method's cutoff and score scale, the kinds of normal and their
cutoffs, the column rules' limits, and with ``contamination`` the consensus threshold. When the sample is
the whole dataset, the model is exactly the in-memory scan's, and :meth:`score` reproduces its per-record
scores and flags.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from investigator.checks.limits import load_limits, spec_hits
from investigator.explain.cells import CategoryRule, CellFinder, CellModel
from investigator.explain.explainer import Explainer
from investigator.explain.typical import TypicalValues
from investigator.explain.view import Pool, peer_candidates
from investigator.io.tables import Source, Table
from investigator.methods.base import Method
from investigator.methods.column_rules import ColumnRules
from investigator.methods.neighbors import NeighborSearch
from investigator.pipeline.combine import TOP_SHARE, rule_sentence
from investigator.pipeline.engine import run_scan
from investigator.pipeline.options import ScanOptions
from investigator.pipeline.result import MethodResult, ScanResult
from investigator.pipeline.run_record import RunRecord
from investigator.pipeline.scoring import FULL, Effort, apply_kinds, combine_results
from investigator.prepare.features import FeaturePreparer
from investigator.prepare.roles import ColumnInfo
from investigator.progress import silent
from investigator.structure.kinds import KindCalibration, KindsOfNormal

if TYPE_CHECKING:
    from investigator.checks.limits import Limit

MODEL_PEERS = 10_000  # ordinary sample records a partition's explanations find peers among


@dataclass(frozen=True)
class ScanModel:
    """Everything scoring a block needs, fitted once. :meth:`score` only reads it: the Dask path sends one
    model to every worker, and a worker may score several blocks with it at once, in threads. Per-kind
    scales are the frozen :class:`~investigator.structure.kinds.KindCalibration` objects of ``calibrations``;
    fitted arrays (the methods', the search's, the kinds', the peer pool's) are read-only."""

    options: ScanOptions
    columns: list[ColumnInfo]
    preparer: FeaturePreparer
    search: NeighborSearch | None
    fitted_methods: dict[str, Method]  # per method key, the fitted Method
    rules: ColumnRules
    kinds: KindsOfNormal | None  # the kinds of normal of the fit sample, or None
    calibrations: dict[str, KindCalibration]  # per method key, its per-kind scales (empty without kinds)
    combined_far: float | None  # the far-out level of the combined evidence on the fit sample
    z_threshold: float | None  # with contamination: the consensus z the fit sample's flagged reach
    pool: Pool  # ordinary sample records (peers)
    typical: TypicalValues  # typical ranges of the ordinary sample records
    limits: list[Limit] | None
    key_column: str | None
    source: Source
    run: RunRecord  # the fit's run record
    n_fit: int
    cells: tuple[CellModel, CategoryRule] | None = None  # the cell test fitted on the sample, shared by blocks

    @classmethod
    def fit(cls, sample: Table, options: ScanOptions, progress=None, effort: Effort = FULL) -> ScanModel:
        """Fit on ``sample``; its ``rows`` must be the records' 1-based rows in the whole dataset. ``effort``: how
        hard the randomised fits search (scoring.Effort)."""
        fit = run_scan(sample, options, progress or silent, effort=effort)
        search = fit.neighbors
        pool = fit.explainer.pool
        typical = fit.explainer.typical
        members = peer_candidates(pool, options)
        if len(members) > MODEL_PEERS:  # the model travels to every worker: a smaller pool keeps it light
            members = np.sort(np.random.default_rng([options.seed, 23]).choice(members, MODEL_PEERS, replace=False))
        keys = [pool.keys[i] for i in members]
        pool = _read_only_pool(Pool(pool.features.subset(members), np.arange(len(members)), pool.rows[members],
                                    keys, "sample"))
        threshold = None
        if options.contamination is not None:
            threshold = float(fit.combination.z[fit.flagged].min())
        limits = None
        if options.limits:
            limits = load_limits(options.limits, sample)
        calibrations = {k: r.calibration for k, r in fit.method_results.items() if r.calibration is not None}
        return cls(options, fit.columns, fit.preparer, search, {k: r.method for k, r in fit.method_results.items()},
                   fit.rules, fit.kinds, calibrations, fit.combination.combined_far, threshold, pool, typical,
                   limits, sample.key_column, sample.source, fit.run, sample.n_rows, cells=fit.cells.fitted)

    def score(self, frame: pd.DataFrame, first_row: int) -> ScanResult:
        """Score the records of ``frame``, which are rows first_row + 1, first_row + 2, ... of the dataset."""
        frame = frame.reset_index(drop=True)
        rows0 = first_row + np.arange(len(frame))
        table = Table(frame, self.source, self.key_column, [], rows0 + 1)
        features = self.preparer.transform(table)
        X = features.values
        # A record of the sample is also in the neighbour reference: the same table, never its own neighbour.
        graph = self.search.query(X, same_table=True) if self.search is not None else None
        results: dict[str, MethodResult] = {}
        for key, m in self.fitted_methods.items():
            scores = m.score(X, graph) if m.needs_neighbors else m.score(X)
            results[key] = dataclasses.replace(MethodResult.overall(m, scores), calibration=self.calibrations.get(key))
        kinds = None
        if self.kinds is not None:  # each record judged within the kind it is nearest to
            labels = self.kinds.assign(X)
            kinds = dataclasses.replace(self.kinds, labels=labels)
            results = apply_kinds(results, kinds, X)
        combination = combine_results(results, self.options, by_rank=False, combined_far=self.combined_far)
        if self.z_threshold is not None:
            flagged = combination.z >= self.z_threshold
            combination = dataclasses.replace(
                combination, flagged=flagged, reason=np.where(flagged, TOP_SHARE, "").astype(object),
                rule=rule_sentence(len(self.fitted_methods) - ("hotelling" in self.fitted_methods),
                                   self.options.contamination))
        out_of_spec = None
        if self.limits is not None:
            out_of_spec = spec_hits(table, self.limits)
        # The block's run record is the fit's: everything that decided its scores was fitted there.
        result = ScanResult(table, self.options, self.columns, features, self.preparer, self.search, graph,
                            results, combination, self.rules, self._hits(table, features), self.run,
                            out_of_spec=out_of_spec, kinds=kinds)
        result.explainer = Explainer(result, pool=self.pool, typical=self.typical)  # peers among the fit's
        result.cells = CellFinder(result, fitted=self.cells)  # cells judged by the fit's statistics
        return result

    def _hits(self, table: Table, features) -> list[list[dict]]:
        return [numeric + timing for numeric, timing in zip(self.rules.hits(features),
                                                            self.preparer.calendar_hits(table), strict=True)]

    def score_frame(self, frame: pd.DataFrame, first_row: int, columns=None) -> pd.DataFrame:
        """One output row per record (the columns of :meth:`ScanResult.to_frame`, the input ``columns`` included;
        ``rank`` is left out, since a partition cannot know the other partitions' records: order by
        ``consensus_z``)."""
        result = self.score(frame, first_row)
        out = result.to_frame(columns).drop(columns=["rank"])
        if self.key_column is not None and not pd.api.types.is_integer_dtype(out["key"]):
            out["key"] = out["key"].astype(str)
        return out


def _read_only_pool(pool: Pool) -> Pool:
    """The peer pool with its arrays read-only: every block's explanations read the same pool."""
    from investigator.methods.fitted import read_only

    f = pool.features
    for array in (f.values, f.transformed, f.imputed, f.raw, *f.levels.values(), pool.positions, pool.rows):
        read_only(array)
    return pool
