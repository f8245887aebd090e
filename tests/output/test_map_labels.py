"""The PNG map (investigator/output/map_plot.py): every small group and cluster labelled, no label box over a
point or another label, and the flagged records coloured by rank on a log scale, so they do not all share
one colour. Checked on the drawn figure with matplotlib's own window extents (pixels)."""

from __future__ import annotations

import numpy as np
import pytest

from investigator.output.map_plot import LABEL_GID, map_figure
from investigator.structure.groups import find_groups
from investigator.structure.map import embed


def invented_records(seed: int = 4) -> tuple[np.ndarray, np.ndarray]:
    """Two large clusters of unequal size and shape, four small tight batches of unusual records (3 to 9
    each) placed near the clusters and each other, and a few isolated ones; the batches and the isolated
    ones are flagged."""
    rng = np.random.default_rng(seed)
    big = rng.normal(0, 1, size=(1500, 4))
    other = rng.normal(0, 0.4, size=(400, 4)) + [6, 0, 0, 0]
    batches = [rng.normal(0, 0.05, size=(k, 4)) + centre for k, centre in
               ((3, [0, 4.5, 0, 0]), (5, [3, 4, 0, 0]), (7, [6, 3.5, 0, 0]), (9, [3, -4, 0, 0]))]
    lone = rng.normal(0, 1, size=(6, 4)) * 6
    X = np.vstack([big, other, *batches, lone])
    flagged = np.zeros(len(X), dtype=bool)
    flagged[1900:] = True
    return X, flagged


def boxes_and_points(fig, coords):
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    ax = fig.axes[0]
    labels = [t for t in ax.texts if t.get_gid() == LABEL_GID]
    boxes = [t.get_bbox_patch().get_window_extent(renderer) for t in labels]
    return labels, boxes, ax.transData.transform(coords)


@pytest.mark.parametrize("method", ["pca", "umap"])
def test_every_group_is_labelled_and_no_label_covers_a_point_or_a_label(method):
    X, flagged = invented_records()
    groups = find_groups(X, flagged)
    assert len(groups.small_ids) >= 3, "the invented batches are small groups"
    coords = embed(X, method=method, seed=0).coords
    consensus = np.where(flagged, 0.95, 0.2)
    fig, placed = map_figure(coords, flagged, consensus, groups)
    labels, boxes, points = boxes_and_points(fig, coords)
    texts = [t.get_text() for t in labels]
    for gid in groups.small_ids:
        assert f"group {gid} ({groups.size_of(gid)})" in texts
    assert len(labels) == len(groups.small_ids) + len(groups.large_ids) and placed.covering == 0
    for i, a in enumerate(boxes):
        inside = (points[:, 0] >= a.x0) & (points[:, 0] <= a.x1) & (points[:, 1] >= a.y0) & (points[:, 1] <= a.y1)
        assert not inside.any(), f"{texts[i]} covers {int(inside.sum())} points"
        for j, b in enumerate(boxes[i + 1:], start=i + 1):
            assert not a.overlaps(b), f"{texts[i]} overlaps {texts[j]}"
        assert fig.axes[0].get_window_extent(fig.canvas.get_renderer()).contains(a.x0, a.y0)


def test_the_measurement_sees_a_label_drawn_over_its_points():
    # The check above can fail: a label put at its group's centre, as the map drew them before, covers it.
    X, flagged = invented_records()
    groups = find_groups(X, flagged)
    coords = embed(X, method="pca").coords
    fig, _ = map_figure(coords, flagged, np.where(flagged, 0.95, 0.2), groups)
    label = next(t for t in fig.axes[0].texts if t.get_gid() == LABEL_GID)
    centre = fig.axes[0].transData.transform(coords[groups.members(groups.small_ids[0])].mean(axis=0))
    label.set_position(tuple(centre))
    _, boxes, points = boxes_and_points(fig, coords)
    a = boxes[0]
    assert ((points[:, 0] >= a.x0) & (points[:, 0] <= a.x1) & (points[:, 1] >= a.y0) & (points[:, 1] <= a.y1)).any()


def test_flagged_records_are_coloured_by_rank_on_a_log_scale():
    X, flagged = invented_records()
    n_flagged = int(flagged.sum())
    # Consensus of the flagged all between 0.93 and 1.00, as a scan gives them: a consensus scale would give
    # them one colour; their ranks 1..n on a log scale spread them over the colour map.
    consensus = np.where(flagged, 0.0, 0.2)
    consensus[flagged] = np.linspace(1.0, 0.93, n_flagged)
    rank = np.empty(len(X), dtype=int)
    rank[np.argsort(-consensus, kind="stable")] = np.arange(1, len(X) + 1)
    coords = embed(X, method="pca").coords
    fig, _ = map_figure(coords, flagged, consensus, None, rank=rank)
    points = fig.axes[0].collections[1]
    norm = points.norm
    assert type(norm).__name__ == "LogNorm" and norm.vmin == 1 and norm.vmax == rank[flagged].max()
    # A log scale: ranks 1 and 2 are as far apart in colour as 8 and 16 (log 2 / log vmax each).
    assert np.isclose(norm(2) - norm(1), norm(16) - norm(8))
    shown = np.sort(np.asarray(norm(points.get_array())))
    assert shown[0] == 0.0 and np.isclose(shown[-1], 1.0)
    fig.canvas.draw()  # the face colours are mapped from the ranks when drawn
    colours = {tuple(np.round(c, 3)) for c in points.get_facecolors()}
    assert len(colours) >= n_flagged * 0.6  # distinct colours for the flagged records
    label = fig.axes[1].get_ylabel()
    assert "rank" in label and "log scale" in label
