"""Which parts of a scan ran on a sample, and from what size: the ``approximations`` list of the run record.

Each entry names the part, what it does on large data, the size it switches on above, whether this scan
used it, and whether ``--exact`` turns it off. Costs then grow about linearly in rows once the models are
fitted: every record is scored against fixed-size fitted models.
"""

from __future__ import annotations

from investigator.explain import view
from investigator.methods import mcd
from investigator.pipeline.run_record import Approximation
from investigator.structure import groups as groups_module
from investigator.structure import kinds as kinds_module
from investigator.structure import map as map_module


def approximations(n_fit: int, n_ordinary: int, options, search=None,
                   method_results: dict | None = None) -> tuple[Approximation, ...]:
    """The list for a scan fitted on ``n_fit`` reference records with ``n_ordinary`` ordinary records in the
    pool peers come from; ``method_results``: the scan's, by method key."""
    results = method_results or {}
    out = []
    if search is not None:
        out.append(Approximation(
            part="neighbour search (local_density, neighbor_distance)",
            approximation=f"neighbours among a reproducible random sample of {search.sample_size:,} "
                          "reference records, searched in float32 (Sugiyama & Borgwardt 2013)",
            above=search.sample_above, used=search.mode_ == "sampled", exact_turns_off=True,
        ))
    rd = results.get("robust_distance")
    if rd is not None:
        sample = rd.method.mcd_.sample
        out.append(Approximation(
            part="robust_distance (MCD)",
            approximation=f"raw MCD searched on a reproducible random sample of {mcd.SAMPLE_SIZE:,} records; "
                          "consistency correction and reweighting on every record",
            above=mcd.SAMPLE_ABOVE, used=bool(sample), exact_turns_off=True,
        ))
    if "isolation" in results:
        out.append(Approximation(
            part="isolation",
            approximation="each tree grown on a random subsample of 256 records (the method's own design, "
                          "Liu, Ting & Zhou 2008)",
            above=256, used=n_fit > 256, exact_turns_off=False,
        ))
    out.append(Approximation(
        part="peers in explanations",
        approximation=f"peers searched among a reproducible random sample of {view.PEER_SAMPLE:,} ordinary "
                      "records",
        above=view.PEER_SAMPLE_ABOVE, used=n_ordinary > view.PEER_SAMPLE_ABOVE and not options.exact,
        exact_turns_off=True,
    ))
    out.append(Approximation(
        part="groups and kinds of normal",
        approximation=f"HDBSCAN on up to {groups_module.GROUP_SET:,} records (every flagged record kept) and "
                      f"kinds of normal found on {kinds_module.SAMPLE:,} drawn by content, then fitted on all their "
                      "members",
        above=groups_module.GROUP_SET, used=n_fit > groups_module.GROUP_SET, exact_turns_off=False,
    ))
    if options.map != "none":
        out.append(Approximation(
            part="map",
            approximation=f"UMAP fitted on {map_module.SAMPLE_SIZE:,} records (flagged ones first); the others "
                          "placed among their nearest fitted records",
            above=map_module.SAMPLE_ABOVE, used=n_fit > map_module.SAMPLE_ABOVE, exact_turns_off=False,
        ))
    return tuple(out)
