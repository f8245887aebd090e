"""Draw the map as a PNG: ordinary records faint, flagged records by rank, groups outlined and labelled.

matplotlib's Agg canvas is used directly (no pyplot, no display, no global state). The map's axes have
no units: UMAP and PCA positions only say which records are near each other. Flagged records are
triangles with a dark edge, so the map reads without colour too; their fill runs along a perceptually
uniform colour map (plasma) by their rank (1 = most unusual) on a log scale, with a colour bar: flagged
records all have a consensus near the top of its range (0.93-1.00 is common), so a consensus scale would
give them one colour, while ranks 1, 10 and 100 stay apart. Groups are outlined by the convex hull of their
members' positions, widened by a small margin. Every small group and large cluster (kind of normal) gets a
label (id and size) placed in free space, with a leader line to its outline or centre: no label box covers
a point or another label (:func:`place_labels`; where no free place is left, the label goes where it
covers the fewest points, and the notice in ``placed`` says so).

The PNG is written under a temporary name and renamed when complete (:func:`atomic_output`), so a killed
run or a full disk leaves no empty or truncated PNG, and an earlier map of the same name stays intact.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import LogNorm
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.text import Annotation
from scipy.spatial import ConvexHull

from investigator.io.output_files import atomic_output
from investigator.structure.groups import Grouping

MARGIN = 0.015  # outline margin, as a share of the map's larger span
ROOM = 0.14  # free space around the points for the labels, as a share of each span
LABEL_GID = "map-label"  # the gid of every group and cluster label (the tests find them by it)
POINT_PAD = 3.0  # pixels kept free around each point's centre, beyond its marker radius


@dataclass
class Placed:
    """The labels drawn: the artists (in drawing order) and how many had to cover a point."""

    labels: list[Annotation]
    covering: int = 0


def map_figure(coords: np.ndarray, flagged: np.ndarray, consensus: np.ndarray, groups: Grouping | None,
               title: str = "Map of the records", *, subtitle: str | None = None, rank: np.ndarray | None = None,
               dpi: int = 150) -> tuple[Figure, Placed]:
    """The map's figure, drawn, and its labels; :func:`draw_map` writes it. ``rank``: each record's rank
    (1 = most unusual, ``ScanResult.rank``); by default from ``consensus`` (highest first)."""
    coords = np.asarray(coords, dtype=float)
    flagged = np.asarray(flagged, dtype=bool)
    consensus = np.asarray(consensus, dtype=float)
    n = len(coords)
    if coords.shape != (n, 2) or flagged.shape != (n,) or consensus.shape != (n,):
        raise ValueError("coords must be n x 2, flagged and consensus n values each")
    if rank is None:
        rank = np.empty(n, dtype=np.int64)
        rank[np.argsort(-np.nan_to_num(consensus, nan=-np.inf), kind="stable")] = np.arange(1, n + 1)
    rank = np.asarray(rank, dtype=float)
    fig = Figure(figsize=(9, 7.5), dpi=dpi)
    FigureCanvasAgg(fig)
    ax = fig.add_axes((0.07, 0.14, 0.78, 0.76))
    cax = fig.add_axes((0.87, 0.14, 0.025, 0.76))
    span = float(np.ptp(coords, axis=0).max()) if n else 1.0
    span = span or 1.0
    size = float(np.clip(8000 / max(n, 1), 1, 12))  # dots shrink as records multiply
    x, y = coords[~flagged].T
    ax.scatter(x, y, s=size, c="0.55", alpha=0.45, linewidths=0)
    order = np.flatnonzero(flagged)[np.argsort(-rank[flagged], kind="stable")]  # rank 1 drawn on top
    x, y = coords[order].T
    worst = float(max(2.0, rank[order].max())) if len(order) else 2.0
    points = ax.scatter(x, y, s=28, c=rank[order] if len(order) else [], cmap="plasma_r",
                        norm=LogNorm(vmin=1, vmax=worst), marker="^", edgecolors="0.1", linewidths=0.5, zorder=3)
    bar = fig.colorbar(points, cax=cax)
    bar.set_label("rank of the flagged record (1 = most unusual; log scale)")
    ticks = [t * 10**e for e in range(int(np.log10(worst)) + 1) for t in (1, 2, 5) if t * 10**e <= worst]
    bar.set_ticks(ticks, labels=[f"{t:,}" for t in ticks])  # plain numbers, not powers of ten
    bar.minorticks_off()
    bar.ax.invert_yaxis()  # rank 1 at the top
    outlines: list[tuple[str, np.ndarray]] = []
    if groups is not None:
        for gid in groups.large_ids:
            centre = np.median(coords[groups.members(gid)], axis=0)
            outlines.append((f"ordinary cluster {gid} ({groups.size_of(gid):,})", centre[None, :]))
        for gid in groups.small_ids:
            outline = _outline(coords[groups.members(gid)], MARGIN * span)
            ax.plot(*outline.T, color="0.1", linewidth=1.1, zorder=4)
            outlines.append((f"group {gid} ({groups.size_of(gid)})", outline))
    ax.set_xlabel("map axis 1 (no units)")
    ax.set_ylabel("map axis 2 (no units)")
    ax.set_xticks([])
    ax.set_yticks([])
    if n:  # room at the edges for the labels, and one unit as long across as up (the axes' own shape)
        lo, hi = coords.min(axis=0), coords.max(axis=0)
        pad = np.maximum((hi - lo) * ROOM, 1e-9 * span)
        lo, hi = lo - pad, hi + pad
        width, height = ax.get_position().width * 9, ax.get_position().height * 7.5  # inches
        wide = (hi[0] - lo[0]) / (hi[1] - lo[1])
        middle = (lo + hi) / 2
        if wide < width / height:
            half = (hi[1] - lo[1]) * width / height / 2
            lo[0], hi[0] = middle[0] - half, middle[0] + half
        else:
            half = (hi[0] - lo[0]) * height / width / 2
            lo[1], hi[1] = middle[1] - half, middle[1] + half
        ax.set_xlim(lo[0], hi[0])
        ax.set_ylim(lo[1], hi[1])
    fig.text(0.07, 0.955, title, fontsize=12, va="center")
    if subtitle:
        fig.text(0.07, 0.922, subtitle, fontsize=8.5, color="0.3", va="center")
    handles = [
        Line2D([], [], ls="", marker="o", ms=4, color="0.6", label=f"ordinary record ({n - len(order):,})"),
        Line2D([], [], ls="", marker="^", ms=7, mfc="#f0a030", mec="0.1",
               label=f"flagged record ({len(order):,})"),
    ]
    if groups is not None and groups.small_ids:
        handles.append(Line2D([], [], color="0.1", lw=1.1, label="group of records (id, size)"))
    fig.legend(handles=handles, loc="lower left", bbox_to_anchor=(0.07, 0.02), ncol=3, frameon=False,
               fontsize=9)
    placed = place_labels(fig, ax, coords, outlines, radius=max(np.sqrt(size), np.sqrt(28)) / 2 * dpi / 72)
    return fig, placed


def draw_map(coords: np.ndarray, flagged: np.ndarray, consensus: np.ndarray, groups: Grouping | None,
             path: str | Path, title: str = "Map of the records", *, subtitle: str | None = None,
             rank: np.ndarray | None = None, dpi: int = 150) -> Path:
    """Write the map to ``path`` (PNG) and return the path.

    Parameters
    ----------
    coords : n x 2 map positions (``MapResult.coords``).
    flagged : n booleans; consensus : n values in [0, 1] (``ScanResult.flagged``, ``.consensus``).
    groups : the :class:`Grouping` of the same records, or None to draw no groups.
    title, subtitle : text above the map (e.g. the file name; the method and seed).
    rank : each record's rank (``ScanResult.rank``: 1 = most unusual, copies share one), which colours
        the flagged records; by default from ``consensus``.
    """
    fig, _ = map_figure(coords, flagged, consensus, groups, title, subtitle=subtitle, rank=rank, dpi=dpi)
    path = Path(path)
    with atomic_output(path, parameter="path") as tmp:
        fig.savefig(tmp, dpi=dpi, format="png")
    return path


def place_labels(fig: Figure, ax, coords: np.ndarray, outlines: list[tuple[str, np.ndarray]],
                 radius: float) -> Placed:
    """Label each outline (text, its points in data units: an outline or a single centre) in free space.

    Works in pixels on the drawn figure: the points are marked on a grid of the axes' pixels (each widened
    by its marker ``radius`` and a pad), and a summed-area table tells in constant time whether a box holds
    any. For each label, candidate places on rings around its outline's centre, nearest first, are tried;
    the first whose box is inside the axes, covers no point and no label placed before wins, and a leader
    line joins it to the nearest point of the outline. Smaller groups are placed first (they are the ones
    a reviewer looks for)."""
    canvas = fig.canvas
    renderer = canvas.get_renderer()  # type: ignore[attr-defined]
    ax.apply_aspect()
    box = ax.get_window_extent(renderer)
    x0, y0, w, h = int(box.x0), int(box.y0), int(box.width), int(box.height)
    grid = np.zeros((h + 1, w + 1), dtype=np.int32)
    if len(coords):
        px = ax.transData.transform(coords)
        r = int(np.ceil(radius + POINT_PAD))
        cx = np.clip(np.round(px[:, 0]).astype(int) - x0, 0, w)
        cy = np.clip(np.round(px[:, 1]).astype(int) - y0, 0, h)
        # Each point as a square of side 2r: marked at its corners of a 2-D difference array, then summed.
        diff = np.zeros((h + 2, w + 2), dtype=np.int32)
        ya, yb = np.clip(cy - r, 0, h + 1), np.clip(cy + r + 1, 0, h + 1)
        xa, xb = np.clip(cx - r, 0, w + 1), np.clip(cx + r + 1, 0, w + 1)
        np.add.at(diff, (ya, xa), 1)
        np.add.at(diff, (ya, xb), -1)
        np.add.at(diff, (yb, xa), -1)
        np.add.at(diff, (yb, xb), 1)
        grid = (diff.cumsum(axis=0).cumsum(axis=1)[:h + 1, :w + 1] > 0).astype(np.int32)
    area = np.zeros((h + 2, w + 2), dtype=np.int64)
    area[1:, 1:] = grid.cumsum(axis=0).cumsum(axis=1)

    def covered(b: tuple[float, float, float, float]) -> int:
        """Pixels of points inside the box (x0, y0, x1, y1 in figure pixels)."""
        a0, b0 = int(np.floor(b[0])) - x0, int(np.floor(b[1])) - y0
        a1, b1 = int(np.ceil(b[2])) - x0, int(np.ceil(b[3])) - y0
        a0, b0, a1, b1 = max(a0, 0), max(b0, 0), min(a1, w), min(b1, h)
        if a1 <= a0 or b1 <= b0:
            return 0
        return int(area[b1 + 1, a1 + 1] - area[b0, a1 + 1] - area[b1 + 1, a0] + area[b0, a0])

    taken: list[tuple[float, float, float, float]] = []
    placed = Placed([])
    order = sorted(range(len(outlines)), key=lambda i: len(outlines[i][1]))
    step = 0.03 * max(w, h)
    angles = np.linspace(0, 2 * np.pi, 24, endpoint=False)
    for i in order:
        text, shape = outlines[i]
        shape_px = ax.transData.transform(shape)
        centre = shape_px.mean(axis=0)
        label = ax.annotate(text, xy=(0, 0), xytext=(0, 0), textcoords="figure pixels", xycoords="figure pixels",
                            ha="center", va="center", fontsize=8, zorder=6, gid=LABEL_GID,
                            bbox={"boxstyle": "round,pad=0.25", "fc": "white", "ec": "0.1", "lw": 0.6},
                            arrowprops={"arrowstyle": "-", "color": "0.15", "lw": 0.7, "shrinkA": 0, "shrinkB": 2})
        label.set_position(tuple(centre))
        bw, bh = _size(label, renderer)
        best, best_cover = None, None
        reach = float(np.max(np.linalg.norm(shape_px - centre, axis=1))) if len(shape_px) > 1 else 0.0
        for ring in range(1, 40):
            d = reach + bh / 2 + ring * step * 0.5
            for a in angles:
                cxy = centre + d * np.array([np.cos(a), np.sin(a)])
                b = (cxy[0] - bw / 2, cxy[1] - bh / 2, cxy[0] + bw / 2, cxy[1] + bh / 2)
                if b[0] < box.x0 or b[1] < box.y0 or b[2] > box.x1 or b[3] > box.y1:
                    continue
                if any(_overlap(b, t) for t in taken):
                    continue
                cover = covered(b)
                if cover == 0:
                    best, best_cover = cxy, 0
                    break
                if best_cover is None or cover < best_cover:
                    best, best_cover = cxy, cover
            if best_cover == 0:
                break
        if best is None:
            best, best_cover = centre + np.array([0.0, reach + bh]), 1
        near = shape_px[np.argmin(np.linalg.norm(shape_px - best, axis=1))]
        label.xy = tuple(near)
        label.set_position(tuple(best))
        placed.covering += int(bool(best_cover))
        taken.append((best[0] - bw / 2, best[1] - bh / 2, best[0] + bw / 2, best[1] + bh / 2))
        placed.labels.append(label)
    return placed


def _size(label: Annotation, renderer) -> tuple[float, float]:
    """The label's box in pixels, its rounded frame and a little air included."""
    patch = label.get_bbox_patch()
    label.update_bbox_position_size(renderer)
    extent = patch.get_window_extent(renderer) if patch is not None else label.get_window_extent(renderer)
    return float(extent.width) + 4, float(extent.height) + 4


def _overlap(a: tuple[float, float, float, float], b: tuple[float, float, float, float]) -> bool:
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


def _outline(points: np.ndarray, margin: float) -> np.ndarray:
    """A closed outline around the points: the convex hull of each point widened to a 16-gon of radius
    ``margin``, so one point, two points or points on a line still get an area."""
    angles = np.linspace(0, 2 * np.pi, 16, endpoint=False)
    ring = margin * np.column_stack([np.cos(angles), np.sin(angles)])
    widened = (points[:, None, :] + ring[None, :, :]).reshape(-1, 2)
    hull = widened[ConvexHull(widened).vertices]
    return np.vstack([hull, hull[:1]])
