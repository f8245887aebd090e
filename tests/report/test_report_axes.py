"""The report's score histograms (investigator/report/plots.py): no two tick labels overlap, on log axes
too, measured with matplotlib's own bounding boxes of the drawn labels (pixels)."""

from __future__ import annotations

import matplotlib.style
import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from investigator.report.plots import method_figure

RANGES = [(0.5, 6), (0.9, 12), (1.2, 30), (0.05, 0.9), (3, 40), (0.2, 400), (1e-3, 2e4)]


def overlapping(fig) -> list[tuple[str, str]]:
    """Pairs of tick labels (major and minor, inside the view) that overlap, on every axis of ``fig``."""
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    pairs = []
    for ax in fig.axes:
        if not ax.get_visible():
            continue
        for axis, (lo, hi), at in ((ax.xaxis, ax.get_xlim(), 0), (ax.yaxis, ax.get_ylim(), 1)):
            lo, hi = min(lo, hi), max(lo, hi)
            labels = [t for t in axis.get_ticklabels() + axis.get_ticklabels(minor=True)
                      if t.get_visible() and t.get_text() and lo <= t.get_position()[at] <= hi]
            boxes = [t.get_window_extent(renderer) for t in labels]
            pairs += [(labels[i].get_text(), labels[j].get_text()) for i in range(len(boxes))
                      for j in range(i + 1, len(boxes)) if boxes[i].overlaps(boxes[j])]
    return pairs


def scores(low: float, high: float, n: int = 3000) -> np.ndarray:
    # Spread evenly on a log scale between low and high, as neighbour distances of mixed-density data are.
    return np.exp(np.random.default_rng(1).uniform(np.log(low), np.log(high), n))


@pytest.mark.parametrize("low, high", RANGES)
def test_no_tick_labels_overlap_on_the_score_histograms(low, high):
    s = scores(low, high)
    cutoff = float(np.quantile(s, 0.97))
    with matplotlib.style.context("default"):
        fig = method_figure({"neighbor_distance": (s, cutoff, s > cutoff), "local_density": (s, cutoff, s > cutoff),
                             "isolation": (s / s.max(), 0.6, s / s.max() > 0.6)})
    assert fig.axes[0].get_xscale() == "log"
    assert overlapping(fig) == []
    ticks = [t for t in fig.axes[0].get_xticklabels() if t.get_text()]
    assert 2 <= len(ticks) <= 5  # few ticks, plain numbers
    assert all("10^" not in t.get_text() for t in ticks)


def test_the_measurement_sees_matplotlibs_own_overlapping_log_labels():
    # The check can fail: matplotlib's default log axis on a narrow panel labels its minor ticks from 1.2 to
    # 30 (2x10^0, 3x10^0, 4x10^0, ...), and they run into each other. The report drew them so before.
    s = scores(1.2, 30)
    with matplotlib.style.context("default"):
        fig = Figure(figsize=(9, 2.6), layout="constrained")
        FigureCanvasAgg(fig)
        ax = fig.subplots(1, 2)[0]
        ax.hist(s, bins=np.geomspace(1.2, 30, 41))
        ax.set_xscale("log")
    assert overlapping(fig)
