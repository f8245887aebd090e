"""A 2-D map of all records, for looking at: near on the map means similar in the prepared features.

* ``umap``: UMAP (McInnes, Healy & Melville 2018, "UMAP: Uniform manifold approximation and projection
  for dimension reduction"), package umap-learn, with its defaults (15 neighbours, min_dist 0.1, Euclidean
  distance) on the prepared (robust-scaled) features, ``random_state`` = the seed, so the same seed gives
  the same map. The neighbours are found exactly with scikit-learn and handed to UMAP, so its own
  approximate search (and the tens of seconds its first use spends compiling) is not needed.
* ``pca``: the first two principal components (Pearson 1901; Hotelling 1933) of the centred features,
  from the singular value decomposition, each axis signed so that its largest loading is positive (the
  convention scikit-learn's PCA uses). Exact, and used for tiny data.
* ``auto``: PCA below ``UMAP_MIN`` (100) records, where UMAP's 15 neighbours are a sixth of the data or
  more and say little about local structure, and when there are at most two features (PCA is then a
  rotation that loses nothing); UMAP otherwise.

Large data: above ``SAMPLE_ABOVE`` (20,000) records, the switch point the neighbour search uses too,
UMAP is fitted on ``SAMPLE_SIZE`` (10,000) records: the rows in ``keep`` (the flagged records), up to half
of the sample, and a reproducible random sample of the others, with the 200 optimisation epochs UMAP
itself gives tables above 10,000 records (it would give the sample 500). Every other record is placed at
the weighted mean of the map positions of its 15 nearest fitted records, with UMAP's own membership
weights exp(-d / sigma), sigma such that the weights sum to log2(15) (McInnes et al. 2018, section 3.1):
the position umap-learn's ``transform`` starts from (see :func:`place`), without the optimisation epochs
``transform`` runs after that. On 30,000 generated records in 20 dimensions (benchmarks/map_speed.py
--compare) the map's trustworthiness was 0.984 with this placement (1.0 s for the 20,000 placed records),
0.985 with ``transform`` (7.3 s) and 0.984 for UMAP fitted on all records. Plain UMAP on 100,000 x 20
records took 245 s here; this path takes about 20 s, most of it importing umap-learn, compiling and
fitting the sample.
"""

from __future__ import annotations

import os
import sys
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from sklearn.neighbors import NearestNeighbors

from investigator.progress import silent
from investigator.user_folders import use_numba_cache

UMAP_MIN = 100
SAMPLE_ABOVE = 20_000
SAMPLE_SIZE = 10_000
PLACE_CHUNK = 50_000
N_NEIGHBORS = 15
MIN_DIST = 0.1
SAMPLED_EPOCHS = 200
METHODS = ("auto", "umap", "pca")


@dataclass
class MapResult:
    """Map coordinates (n x 2, no units), the method that made them, its parameters and notices."""

    coords: np.ndarray
    method: str
    parameters: dict = field(default_factory=dict)
    notices: list[str] = field(default_factory=list)

    def describe(self) -> dict:
        return {"method": self.method, **self.parameters, "notices": list(self.notices)}


def embed(X: np.ndarray, method: str = "auto", seed: int = 0, *,
          keep: np.ndarray | None = None, progress: Callable[[str, float], None] = silent) -> MapResult:
    """Map the records to two dimensions.

    Parameters
    ----------
    X : n x p prepared (robust-scaled) features, as ``Features.values``.
    method : ``"auto"``, ``"umap"`` or ``"pca"`` (rules in the module docstring).
    seed : UMAP's random state and the seed of the sample on large data.
    keep : rows (or n booleans) always among the records UMAP is fitted on, on large data: the flagged
        records, so that their places come from the fit itself.
    progress : called as ``progress(stage, fraction)`` between the steps of a UMAP map (loading umap-learn,
        the neighbour search, the fit, placing the other records chunk by chunk), fraction from 0 to 1. An
        exception it raises stops the map there (the workspace's cancel); the fit itself is one step.
    """
    if method not in METHODS:
        raise ValueError(f"map method must be one of {', '.join(METHODS)}, not {method!r}")
    X = np.asarray(X, dtype=float)
    if X.ndim != 2 or not np.isfinite(X).all():
        raise ValueError("X must be an n x p array of finite numbers")
    n, p = X.shape
    notices: list[str] = []
    if method == "auto":
        method = "pca" if n < UMAP_MIN or p <= 2 else "umap"
        if method == "pca":
            why = f"only {n} records" if n < UMAP_MIN else f"only {p} feature{'s' if p > 1 else ''}"
            notices.append(f"map by PCA ({why}; UMAP is used from {UMAP_MIN} records and 3 features)")
    if method == "umap" and n <= N_NEIGHBORS + 1:
        notices.append(f"map by PCA: UMAP needs more than {N_NEIGHBORS + 1} records, there are {n}")
        method = "pca"
    if method == "pca":
        coords, explained = pca_map(X)
        return MapResult(coords, "pca", {"explained_variance_ratio": [float(v) for v in explained]},
                         notices)
    return _umap(X, seed, keep, notices, progress)


def pca_map(X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Scores on the first two principal components and their shares of the variance.

    With a single feature the second axis is 0 (and its share 0).
    """
    centred = X - X.mean(axis=0)
    _, s, vt = np.linalg.svd(centred, full_matrices=False)
    # Sign convention: the largest loading of each component is positive (as scikit-learn's svd_flip).
    vt = vt * np.sign(vt[np.arange(len(vt)), np.argmax(np.abs(vt), axis=1)])[:, None]
    k = min(2, len(vt))
    coords = np.zeros((len(X), 2))
    coords[:, :k] = centred @ vt[:k].T
    total = float((s**2).sum())
    explained = np.zeros(2)
    if total > 0:
        explained[:k] = s[:k] ** 2 / total
    return coords, explained


def _fit_rows(n: int, keep: np.ndarray | None, rng: np.random.Generator) -> np.ndarray:
    """The records UMAP is fitted on: the kept rows (up to half the sample), then a random sample."""
    if n <= SAMPLE_ABOVE:
        return np.arange(n)
    kept = np.zeros(n, dtype=bool)
    if keep is not None:
        keep = np.asarray(keep)
        kept[np.flatnonzero(keep) if keep.dtype == bool else keep] = True
    kept_rows = np.flatnonzero(kept)
    if len(kept_rows) > SAMPLE_SIZE // 2:
        kept_rows = rng.choice(kept_rows, SAMPLE_SIZE // 2, replace=False)
    others = np.flatnonzero(~kept)
    drawn = rng.choice(others, SAMPLE_SIZE - len(kept_rows), replace=False)
    return np.sort(np.concatenate([kept_rows, drawn]))


def _neighbors(reference: np.ndarray, k: int):
    return NearestNeighbors(n_neighbors=k, algorithm="brute").fit(reference)


def _import_umap():
    """umap-learn, imported so that numba keeps every function it compiles in its cache folder.

    umap-learn and pynndescent mark few of their functions ``cache=True``. Those given a signature are compiled
    as the module is imported (0.9 s of every map run, measured with cProfile on this machine), so numba's
    decorators default to ``cache=True`` while the two packages are imported; the rest are let cache
    afterwards (:func:`_keep_compiled`). The cache is numba's own, keyed by the source file and its timestamp.
    Without a cache folder (``NUMBA_CACHE_DIR``: set by :func:`~investigator.user_folders.use_numba_cache` where
    it can make one), umap-learn is imported as it is."""
    if "umap" not in sys.modules and os.environ.get("NUMBA_CACHE_DIR"):
        # Not imported yet, and a cache folder to write (numba refuses cache=True without one).
        import numba

        originals = numba.njit, numba.jit

        def caching(decorator):
            def decorate(*args, **kwargs):
                kwargs.setdefault("cache", True)
                return decorator(*args, **kwargs)
            return decorate

        numba.njit, numba.jit = caching(numba.njit), caching(numba.jit)
        try:
            import umap  # noqa: F401  (imported here, under the caching decorators)
        finally:
            numba.njit, numba.jit = originals
    import umap

    _keep_compiled(("umap", "pynndescent"))
    return umap


def _keep_compiled(packages: tuple[str, ...]) -> None:
    """Let numba keep every compiled function of ``packages`` in its cache folder, not only those their authors
    marked ``cache=True``: most of UMAP's own are not, and compiling them took 8.6 s of CPU on every map of the
    demo; from the cache 2.5 s (measured on this machine, benchmarks/command_speed.py). A function is compiled
    on its first call, after this; the cache is numba's own (keyed by the source file and its timestamp)."""
    try:
        # Deferred: numba is loaded by umap-learn just before (and only a UMAP map needs either).
        from numba.core.dispatcher import Dispatcher
    except ImportError:  # another numba layout: the functions are compiled as before
        return
    for name, module in list(sys.modules.items()):
        if name.partition(".")[0] not in packages or module is None:
            continue
        for value in list(vars(module).values()):
            if isinstance(value, Dispatcher):  # those marked cache=True already: the same cache again
                try:
                    value.enable_caching()
                except Exception:  # noqa: BLE001 - a function numba cannot cache is compiled as before
                    continue


def _umap(X: np.ndarray, seed: int, keep: np.ndarray | None, notices: list[str],
          progress: Callable[[str, float], None] = silent) -> MapResult:
    progress("loading umap-learn", 0.0)
    # Deferred: umap-learn (and numba) costs 1.5 s to import after the engine (`python -X importtime` on this
    # machine; 3.9 s alone), and only a UMAP map needs it. numba reads its cache folder when it is imported, so
    # the folder is set first (investigator/user_folders.py).
    use_numba_cache()
    umap = _import_umap()

    n = len(X)
    rows = _fit_rows(n, keep, np.random.default_rng([seed, 17]))
    fit = X[rows]
    k = N_NEIGHBORS
    progress("finding the neighbours", 0.1)
    search = _neighbors(fit, k)
    # UMAP's neighbour lists start with the record itself (distance 0), as its own search returns them.
    dist, idx = search.kneighbors(fit)
    # A sample stands for a large table: it gets the 200 epochs UMAP gives tables above 10,000 records.
    epochs = SAMPLED_EPOCHS if len(rows) < n else None
    model = umap.UMAP(n_neighbors=k, min_dist=MIN_DIST, metric="euclidean", random_state=seed,
                      precomputed_knn=(idx, dist, None), n_components=2, n_epochs=epochs)
    progress(f"fitting UMAP on {len(rows):,} records", 0.2)
    with warnings.catch_warnings():
        # "no search index" (we place the rest ourselves) and "n_jobs overridden by random_state".
        warnings.simplefilter("ignore", UserWarning)
        fitted = model.fit_transform(fit).astype(float)
    coords = np.empty((n, 2))
    coords[rows] = fitted
    params = {"n_neighbors": k, "min_dist": MIN_DIST, "metric": "euclidean (scaled features)",
              "random_state": seed, "package": f"umap-learn {umap.__version__}"}
    if len(rows) < n:
        rest = np.setdiff1d(np.arange(n), rows)
        # The rest are placed in float32 and in chunks, as the sampled neighbour search does: on a million
        # records this halves the time and bounds the memory; positions agree to about 1e-6.
        index = _neighbors(fit.astype(np.float32), k)
        for start in range(0, len(rest), PLACE_CHUNK):
            progress("placing the other records", 0.85 + 0.15 * start / len(rest))
            part = rest[start:start + PLACE_CHUNK]
            d, i = index.kneighbors(X[part].astype(np.float32))
            coords[part] = place(fitted, d.astype(float), i)
        params.update(fitted_on=len(rows), sample_above=SAMPLE_ABOVE, n_epochs=SAMPLED_EPOCHS,
                      placed="weighted mean of the 15 nearest fitted records (UMAP membership weights)")
        notices.append(
            f"map: UMAP fitted on {len(rows):,} of {n:,} records (the kept records and a random sample); "
            f"the others placed among their {k} nearest fitted records"
        )
    progress("map ready", 1.0)
    return MapResult(coords, "umap", params, notices)


def place(fitted: np.ndarray, dist: np.ndarray, idx: np.ndarray) -> np.ndarray:
    """Positions of new records from their k nearest fitted records (``dist``, ``idx``: a row each, nearest
    first): the position UMAP's ``transform`` starts from, as umap-learn 0.5 computes it.

    Each neighbour weighs exp(-d / sigma), sigma found by bisection so that the weights of all but the
    nearest sum to log2(k) (the fuzzy membership of McInnes et al. 2018, section 3.1, with the local
    connectivity of 1 that a fit uses lowered to 0 for new records, so rho = 0; umap-learn leaves the
    nearest out of the sum because in a fit it is the record itself). The position is the weighted mean
    of the neighbours' map positions, or the position of a fitted record at distance 0.
    """
    k = dist.shape[1]
    target = np.log2(k)
    lo, hi = np.zeros(len(dist)), np.full(len(dist), np.inf)
    sigma = np.ones(len(dist))
    for _ in range(64):  # the sum grows with sigma, from 0 towards k - 1
        total = np.exp(-dist[:, 1:] / sigma[:, None]).sum(axis=1)
        if np.all(np.abs(total - target) < 1e-5):  # umap-learn's tolerance
            break
        above = total > target
        hi = np.where(above, sigma, hi)
        lo = np.where(above, lo, sigma)
        sigma = np.where(np.isinf(hi), sigma * 2, (lo + hi) / 2)
    w = np.exp(-dist / sigma[:, None])
    out = np.einsum("ij,ijk->ik", w / w.sum(axis=1, keepdims=True), fitted[idx])
    same = dist[:, 0] == 0
    out[same] = fitted[idx[same, 0]]
    return out
