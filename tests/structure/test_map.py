"""The 2-D map (investigator.structure.map) and its drawing (investigator.output.map_plot)."""

import warnings

import numpy as np
import pytest
from matplotlib.image import imread
from sklearn.decomposition import PCA
from sklearn.manifold import trustworthiness

from investigator.output.map_plot import draw_map
from investigator.structure import embed, find_groups
from investigator.structure import map as map_module


def clusters(n: int = 400, p: int = 6, seed: int = 0) -> np.ndarray:
    """Four Gaussian clusters in p features, plus a tight batch of eight far away."""
    rng = np.random.default_rng(seed)
    centres = rng.normal(0, 5, size=(4, p))
    X = centres[rng.integers(0, 4, n)] + rng.normal(size=(n, p))
    X[:8] = 20 + 0.05 * rng.normal(size=(8, p))
    return X


@pytest.fixture(scope="module")
def demo(demo_scan):
    """The session's demo scan (tests/conftest.py) and a map of its prepared features."""
    result = demo_scan[1]
    return result, embed(result.features.values, seed=0)


@pytest.mark.slow
def test_map_keeps_neighbours_on_the_demo(demo):
    # Reference: trustworthiness (Venna & Kaski 2001, "Neighborhood preservation in nonlinear projection
    # methods"), scikit-learn's implementation, of the map against the prepared features the scan used.
    result, m = demo
    assert m.method == "umap" and m.coords.shape == (result.n_records, 2)
    assert trustworthiness(result.features.values, m.coords, n_neighbors=5) >= 0.9


@pytest.mark.slow
def test_same_seed_same_map():
    # Reference: the run itself; UMAP with a fixed random_state is deterministic (umap-learn docs).
    X = clusters()
    first, again = embed(X, seed=3), embed(X, seed=3)
    assert first.method == "umap"
    np.testing.assert_allclose(first.coords, again.coords, atol=1e-6)


@pytest.mark.slow
def test_sampled_path_is_reproducible_and_keeps_neighbours(monkeypatch):
    # Shrink the switch point so 600 records take the large-data path: 250 fitted, 350 placed.
    # References: trustworthiness (Venna & Kaski 2001; scikit-learn) and the run itself.
    monkeypatch.setattr(map_module, "SAMPLE_ABOVE", 300)
    monkeypatch.setattr(map_module, "SAMPLE_SIZE", 250)
    X = clusters(600)
    keep = np.zeros(len(X), dtype=bool)
    keep[:8] = True
    first, again = embed(X, seed=1, keep=keep), embed(X, seed=1, keep=keep)
    assert first.parameters["fitted_on"] == 250 and first.notices
    np.testing.assert_allclose(first.coords, again.coords, atol=1e-6)
    assert trustworthiness(X, first.coords, n_neighbors=5) >= 0.9
    rows = map_module._fit_rows(len(X), keep, np.random.default_rng([1, 17]))
    assert set(range(8)) <= set(rows.tolist())  # kept records are fitted, not placed


@pytest.mark.slow
def test_placement_equals_the_start_of_umap_transform():
    # Reference: umap-learn's own transform steps (umap.umap_: smooth_knn_dist with local_connectivity
    # lowered to 0, compute_membership_strengths, init_graph_transform), on the same neighbours.
    import scipy.sparse as sp
    from umap.umap_ import compute_membership_strengths, init_graph_transform, smooth_knn_dist

    rng = np.random.default_rng(4)
    fitted, positions, new = rng.normal(size=(300, 5)), rng.normal(size=(300, 2)), rng.normal(size=(40, 5))
    new[0] = fitted[7]  # a new record identical to a fitted one takes its position
    dist, idx = map_module._neighbors(fitted, 15).kneighbors(new)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sigmas, rhos = smooth_knn_dist(dist.astype(np.float32), 15.0, local_connectivity=0.0)
        r, c, v, _ = compute_membership_strengths(idx.astype(np.int32), dist.astype(np.float32), sigmas,
                                                  rhos, bipartite=True)
    graph = sp.coo_matrix((v, (r, c)), shape=(len(new), len(fitted))).tocsr()
    graph.eliminate_zeros()
    expected = init_graph_transform(graph, positions.astype(np.float32))
    ours = map_module.place(positions, dist, idx)
    np.testing.assert_allclose(ours, expected, atol=1e-5)
    np.testing.assert_array_equal(ours[0], positions[7])


def test_pca_map_equals_scikit_learn_pca():
    # Reference library: scikit-learn's PCA (full SVD). Principal axes are defined up to sign, so each
    # axis is compared after matching its sign.
    rng = np.random.default_rng(2)
    X = rng.normal(size=(150, 6)) @ rng.normal(size=(6, 6))
    m = embed(X, method="pca")
    ref = PCA(n_components=2, svd_solver="full").fit(X)
    expected = ref.transform(X)
    signs = np.sign((m.coords * expected).sum(axis=0))
    np.testing.assert_allclose(m.coords * signs, expected, atol=1e-9)
    np.testing.assert_allclose(m.parameters["explained_variance_ratio"], ref.explained_variance_ratio_)


def test_auto_uses_pca_for_tiny_data_and_few_features():
    # The rule (module docstring): PCA below 100 records or with at most two features.
    tiny = embed(clusters(60), method="auto")
    assert tiny.method == "pca" and "60 records" in tiny.notices[0]
    flat = embed(clusters(200, p=2), method="auto")
    assert flat.method == "pca"
    one = embed(clusters(200, p=1), method="pca")
    assert (one.coords[:, 1] == 0).all()
    with pytest.raises(ValueError):
        embed(clusters(50), method="tsne")


@pytest.mark.slow
def test_png_is_written_and_not_blank(tmp_path):
    # Reference: matplotlib reads the file back as an image; a drawn map has many distinct colours
    # (grey records, the colour bar, flagged records by consensus), a blank canvas has one.
    X = clusters(300, p=4)
    flagged = np.zeros(len(X), dtype=bool)
    flagged[:8] = True
    flagged[np.argsort(np.linalg.norm(X - X.mean(axis=0), axis=1))[-6:]] = True
    consensus = np.where(flagged, np.linspace(0.9, 1.0, len(X)), 0.2)
    groups = find_groups(X, flagged)
    assert groups.small_ids  # the batch of eight is outlined
    coords = embed(X, method="pca").coords
    path = draw_map(coords, flagged, consensus, groups, tmp_path / "map.png", title="generated records",
                    subtitle="PCA")
    image = imread(path)
    assert image.ndim == 3 and image.shape[0] > 500 and image.shape[1] > 500
    colours = np.unique((image[..., :3] * 255).astype(np.uint8).reshape(-1, 3), axis=0)
    assert len(colours) > 50
    assert (image[..., :3].mean(axis=2) < 0.9).mean() > 0.01  # more than a frame of ink
    bare = draw_map(coords, np.zeros(len(X), dtype=bool), consensus, None, tmp_path / "bare.png")
    assert imread(bare).shape == image.shape


@pytest.mark.slow
def test_progress_reports_the_steps_of_a_umap_map_and_can_stop_it(monkeypatch):
    # The workspace's map worker follows embed(progress=...) and stops it by raising from the callback.
    monkeypatch.setattr(map_module, "SAMPLE_ABOVE", 300)  # the sampled path, with its placing step, on 600
    monkeypatch.setattr(map_module, "SAMPLE_SIZE", 200)
    monkeypatch.setattr(map_module, "PLACE_CHUNK", 150)
    X = clusters(600, p=4)
    steps: list[tuple[str, float]] = []
    mapped = embed(X, method="umap", seed=0, progress=lambda stage, f: steps.append((stage, f)))
    fractions = [f for _, f in steps]
    assert fractions == sorted(fractions) and fractions[0] == 0.0 and fractions[-1] == 1.0
    assert [s for s, _ in steps if s.startswith("placing")] and any(s.startswith("fitting UMAP") for s, _ in steps)
    # The same map as without a callback (it only watches).
    assert np.array_equal(mapped.coords, embed(X, method="umap", seed=0).coords)

    class Stop(Exception):
        pass

    def stop_at_the_fit(stage: str, fraction: float) -> None:
        if stage.startswith("fitting"):
            raise Stop

    with pytest.raises(Stop):
        embed(X, method="umap", seed=0, progress=stop_at_the_fit)
    assert embed(X, method="pca", progress=stop_at_the_fit).method == "pca"  # PCA is one quick step: no reports


_IMPORT_AND_COUNT = """
import numba
decorators = numba.njit, numba.jit
from investigator.structure.map import _import_umap
umap = _import_umap()
compiled = umap.utils.tau_rand_int  # given a signature: compiled while umap-learn is imported
assert (numba.njit, numba.jit) == decorators, "numba's decorators were not put back"
print(sum(compiled.stats.cache_hits.values()), sum(compiled.stats.cache_misses.values()))
"""


def test_functions_compiled_while_umap_learn_is_imported_come_from_numbas_cache_the_next_time():
    # numba's own record of where a function came from (Dispatcher.stats), read in two fresh processes that
    # share one cache folder (the test run's, see conftest.py): the first fills it if it is empty, the second
    # must find the function there. Without cache=True during the import, numba compiles it every time.
    import subprocess
    import sys

    def run() -> tuple[int, int]:
        done = subprocess.run([sys.executable, "-c", _IMPORT_AND_COUNT], capture_output=True, text=True,
                              check=True)
        hits, misses = done.stdout.split()
        return int(hits), int(misses)

    run()
    assert run() == (1, 0)
