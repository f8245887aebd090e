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

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .combine import rule_sentence
from .methods.base import gaussian_scaling
from .options import ScanOptions
from .result import MethodResult, ScanResult
from .table import Source, Table

SKIP_KINDS = ("robust_distance", "hotelling")
MODEL_PEERS = 10_000  # ordinary sample records a partition's explanations find peers among


@dataclass
class ScanModel:
    options: ScanOptions
    columns: list
    preparer: object
    search: object | None
    methods: dict
    rules: object
    kinds: bool  # robust_distance holds one fit per kind of normal; the others calibrate per kind
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
        from .engine import run_scan
        from .explain.view import Pool, ordinary_pool, peer_candidates, typical_ranges
        from .progress import silent

        fit = run_scan(sample, options, progress or silent)
        rows0 = sample.row_numbers - 1
        search = fit.neighbors
        if search is not None:  # reference rows: positions in the sample -> positions in the dataset
            search.reference_rows_ = rows0[search.reference_rows_]
            search.reference_graph_.reference_rows = search.reference_rows_
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
        rd = fit.methods.get("robust_distance")
        limits = None
        if options.limits:
            from .limits import load_limits

            limits = load_limits(options.limits, sample)
        return cls(options, fit.columns, fit.preparer, search, {k: r.method for k, r in fit.methods.items()},
                   fit.rules, bool(rd is not None and len(rd.method.fits_) > 1), threshold, pool, typical,
                   limits, sample.key_column, sample.source, fit.run, sample.n_rows)

    def score(self, frame: pd.DataFrame, first_row: int) -> ScanResult:
        """Score the records of ``frame``, which are rows first_row + 1, first_row + 2, ... of the dataset."""
        from .engine import combine_results

        frame = frame.reset_index(drop=True)
        rows0 = first_row + np.arange(len(frame))
        table = Table(frame, self.source, self.key_column, [], rows0 + 1)
        features = self.preparer.transform(table)
        X = features.values
        graph = self.search.query(X, rows=rows0) if self.search is not None else None
        labels = self.methods["robust_distance"].kind_of(X) if self.kinds else None
        results = {}
        for key, m in self.methods.items():
            scores = m.score(X, graph) if m.needs_neighbors else m.score(X)
            if labels is not None and key not in SKIP_KINDS:
                z, flags = m.apply_kinds(scores, labels)
                results[key] = MethodResult(key, m, scores, flags, gaussian_scaling(z), z)
            else:
                results[key] = MethodResult(key, m, scores, m.flags(scores), m.unify(scores))
        combination = combine_results(results, self.options, by_rank=False)
        if self.z_threshold is not None:
            combination.flagged = combination.z >= self.z_threshold
            combination.rule = rule_sentence(len(self.methods) - ("hotelling" in self.methods),
                                             self.options.contamination)
        out_of_spec = None
        if self.limits is not None:
            from .limits import spec_hits

            out_of_spec = spec_hits(table, self.limits)
        result = ScanResult(table, self.options, self.columns, features, self.preparer, self.search, graph,
                            results, combination, self.rules, self.rules.hits(features), {},
                            out_of_spec=out_of_spec)
        result._pool, result._typical = self.pool, self.typical
        return result

    def score_frame(self, frame: pd.DataFrame, first_row: int) -> pd.DataFrame:
        """One output row per record (the columns of :meth:`ScanResult.to_frame`, plus ``consensus_z``, the
        mean z-value that orders records whose consensus is 1)."""
        result = self.score(frame, first_row)
        out = result.to_frame()
        out["consensus_z"] = result.combination.z
        if self.key_column is not None and not pd.api.types.is_integer_dtype(out["key"]):
            out["key"] = out["key"].astype(str)
        return out
