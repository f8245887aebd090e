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

import numpy as np
import pandas as pd

from investigator.checks.limits import load_limits, spec_hits
from investigator.explain.view import Pool, ordinary_pool, peer_candidates, typical_ranges
from investigator.io.tables import Source, Table
from investigator.pipeline.combine import TOP_SHARE, rule_sentence
from investigator.pipeline.engine import run_scan
from investigator.pipeline.options import ScanOptions
from investigator.pipeline.result import MethodResult, ScanResult
from investigator.pipeline.scoring import apply_kinds, combine_results
from investigator.progress import silent

MODEL_PEERS = 10_000  # ordinary sample records a partition's explanations find peers among


@dataclass
class ScanModel:
    options: ScanOptions
    columns: list
    preparer: object
    search: object | None
    methods: dict
    rules: object
    kinds: object | None  # kinds.KindsOfNormal of the fit sample, or None
    calibrations: dict  # per method key, its kinds.KindCalibration (empty without kinds)
    combined_far: float | None  # the far-out level of the combined evidence on the fit sample
    z_threshold: float | None  # with contamination: the consensus z the fit sample's flagged reach
    pool: object  # explain.view.Pool of ordinary sample records (peers)
    typical: list  # typical ranges of the ordinary sample records
    limits: object | None
    key_column: str | None
    source: Source
    run: dict  # the fit's run record
    n_fit: int

    @classmethod
    def fit(cls, sample: Table, options: ScanOptions, progress=None) -> ScanModel:
        """Fit on ``sample``; its ``rows`` must be the records' 1-based rows in the whole dataset."""
        fit = run_scan(sample, options, progress or silent)
        search = fit.neighbors
        pool = ordinary_pool(fit)
        typical = typical_ranges(fit)
        members = peer_candidates(pool, options)
        if len(members) > MODEL_PEERS:  # the model travels to every worker: a smaller pool keeps it light
            members = np.sort(np.random.default_rng([options.seed, 23]).choice(members, MODEL_PEERS, replace=False))
        keys = [pool.keys[i] for i in members]
        pool = Pool(pool.features.subset(members), np.arange(len(members)), pool.rows[members], keys, "sample")
        threshold = None
        if options.contamination is not None:
            threshold = float(fit.combination.z[fit.flagged].min())
        limits = None
        if options.limits:
            limits = load_limits(options.limits, sample)
        calibrations = {k: r.kinds for k, r in fit.methods.items() if r.kinds is not None}
        return cls(options, fit.columns, fit.preparer, search, {k: r.method for k, r in fit.methods.items()},
                   fit.rules, fit.kinds, calibrations, fit.combination.combined_far, threshold, pool, typical,
                   limits, sample.key_column, sample.source, fit.run, sample.n_rows)

    def score(self, frame: pd.DataFrame, first_row: int) -> ScanResult:
        """Score the records of ``frame``, which are rows first_row + 1, first_row + 2, ... of the dataset."""
        frame = frame.reset_index(drop=True)
        rows0 = first_row + np.arange(len(frame))
        table = Table(frame, self.source, self.key_column, [], rows0 + 1)
        features = self.preparer.transform(table)
        X = features.values
        # A record of the sample is also in the neighbour reference: the same table, never its own neighbour.
        graph = self.search.query(X, same_table=True) if self.search is not None else None
        results = {}
        for key, m in self.methods.items():
            scores = m.score(X, graph) if m.needs_neighbors else m.score(X)
            results[key] = MethodResult.overall(m, scores)
            results[key].kinds = self.calibrations.get(key)
        kinds = None
        if self.kinds is not None:  # each record judged within the kind it is nearest to
            labels = self.kinds.assign(X)
            kinds = dataclasses.replace(self.kinds, labels=labels)
            results = apply_kinds(results, kinds, X)
        combination = combine_results(results, self.options, by_rank=False, combined_far=self.combined_far)
        if self.z_threshold is not None:
            combination.flagged = combination.z >= self.z_threshold
            combination.reason = np.where(combination.flagged, TOP_SHARE, "").astype(object)
            combination.rule = rule_sentence(len(self.methods) - ("hotelling" in self.methods),
                                             self.options.contamination)
        out_of_spec = None
        if self.limits is not None:
            out_of_spec = spec_hits(table, self.limits)
        result = ScanResult(table, self.options, self.columns, features, self.preparer, self.search, graph,
                            results, combination, self.rules, self.rules.hits(features), {},
                            out_of_spec=out_of_spec, kinds=kinds)
        result._pool, result._typical = self.pool, self.typical
        return result

    def score_frame(self, frame: pd.DataFrame, first_row: int) -> pd.DataFrame:
        """One output row per record (the columns of :meth:`ScanResult.to_frame`; ``rank`` is left out, since
        a partition cannot know the other partitions' records: order by ``consensus_z``)."""
        result = self.score(frame, first_row)
        out = result.to_frame().drop(columns=["rank"])
        if self.key_column is not None and not pd.api.types.is_integer_dtype(out["key"]):
            out["key"] = out["key"].astype(str)
        return out
