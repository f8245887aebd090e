"""The map's data: 2-D coordinates of every record and group labels, read from the result when it has them.

The result's own map (``result.map``, n x 2) is used when present. Without one (a scan without ``--map``)
the first two principal components of the prepared features are shown at once (a plain SVD: no extra
import), labelled as such, while the UMAP map is computed in a worker (``tui/jobs.py``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

PCA_SOURCE = "principal components 1 and 2 (PCA), not the UMAP map"


@dataclass(frozen=True)
class MapPoints:
    """The map on screen: n x 2 coordinates, where they come from in words, and ``kind``: "scan" (the scan's
    own map), "pca" (the stand-in until the UMAP map is ready) or "computed" (the map `--map auto` would
    make, computed in the workspace)."""

    coords: np.ndarray
    source: str
    kind: str


def group_labels(result) -> np.ndarray | None:
    """Per record, the group it belongs to (-1 for none), or None when the result has no groups.

    Accepts a per-record label array, or a list of groups each with members given as 0-based positions
    (``positions``/``members`` as ints) or 1-based ``rows``."""
    groups = getattr(result, "groups", None)
    if groups is None:
        return None
    n = result.n_records
    if getattr(groups, "group", None) is not None:  # a structure.groups.Grouping: per-record ids, -1 none
        # Its small groups only: a large cluster is a kind of normal (the record's `kind`), not a group.
        small = getattr(groups, "small_group", None)
        groups = np.asarray(small if small is not None else groups.group)
    if isinstance(groups, np.ndarray) and groups.shape == (n,):
        return np.where(np.isfinite(groups.astype(float)), groups, -1).astype(int)
    labels = np.full(n, -1, dtype=int)
    if isinstance(groups, dict):
        groups = [{"id": k, "positions": v} for k, v in groups.items()]
    try:
        for g, group in enumerate(groups):
            get = group.get if isinstance(group, dict) else lambda name, _g=group: getattr(_g, name, None)
            gid = get("id")
            label = int(gid) if isinstance(gid, int | np.integer) else g + 1
            if get("rows") is not None:
                labels[np.asarray(get("rows"), dtype=int) - 1] = label
            else:
                members = get("positions") if get("positions") is not None else get("members")
                labels[np.asarray(members, dtype=int)] = label
    except (TypeError, ValueError, IndexError):
        return None  # a shape we do not know: show no groups rather than wrong ones
    return labels


def map_coords(result) -> MapPoints:
    """The scan's own map when it has one, else the principal components (``kind`` "pca")."""
    coords = getattr(result, "map", None)
    if coords is not None:
        coords = np.asarray(coords, dtype=float)
        if coords.ndim == 2 and coords.shape[0] == result.n_records and coords.shape[1] >= 2:
            run_map = getattr(getattr(result, "run", None), "map", None)
            method = getattr(run_map, "method", None)
            return MapPoints(coords[:, :2], f"the scan's map ({method.upper()})" if method else "the scan's map",
                             "scan")
    X = np.asarray(result.features.values, dtype=float)
    X = np.nan_to_num(X - X.mean(axis=0))
    if X.shape[1] < 2:
        return MapPoints(np.column_stack([X[:, 0], np.zeros(len(X))]), "the one feature (no map)", "scan")
    # The top two right singular vectors of a random subsample are enough for a picture and keep 100k fast.
    rng = np.random.default_rng(0)
    sample = X if len(X) <= 20000 else X[rng.choice(len(X), 20000, replace=False)]
    _, _, vt = np.linalg.svd(sample, full_matrices=False)
    return MapPoints(X @ vt[:2].T, PCA_SOURCE, "pca")
