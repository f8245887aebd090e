"""Draw the map as a PNG: ordinary records faint, flagged records by consensus, groups outlined.

matplotlib's Agg canvas is used directly (no pyplot, no display, no global state). The map's axes have
no units: UMAP and PCA positions only say which records are near each other. Flagged records are
triangles with a dark edge, so the map reads without colour too; their fill runs along a perceptually
uniform colour map (plasma) by consensus, with a colour bar. Groups are outlined by the convex hull of
their members' positions, widened by a small margin, and labelled with id and size; large clusters (kinds
of normal) get a grey label at their median position and no outline.

The PNG is written under a temporary name and renamed when complete (:func:`atomic_output`), so a killed
run or a full disk leaves no empty or truncated PNG, and an earlier map of the same name stays intact.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from scipy.spatial import ConvexHull

from investigator.io.output_files import atomic_output
from investigator.structure.groups import Grouping

MAX_LABELS = 20  # groups labelled by id and size (the largest); the rest are outlined only
MARGIN = 0.015  # outline margin, as a share of the map's larger span


def draw_map(coords: np.ndarray, flagged: np.ndarray, consensus: np.ndarray, groups: Grouping | None,
             path: str | Path, title: str = "Map of the records", *, subtitle: str | None = None,
             dpi: int = 150) -> Path:
    """Write the map to ``path`` (PNG) and return the path.

    Parameters
    ----------
    coords : n x 2 map positions (``MapResult.coords``).
    flagged : n booleans; consensus : n values in [0, 1] (``ScanResult.flagged``, ``.consensus``).
    groups : the :class:`Grouping` of the same records, or None to draw no groups.
    title, subtitle : text above the map (e.g. the file name; the method and seed).
    """
    coords = np.asarray(coords, dtype=float)
    flagged = np.asarray(flagged, dtype=bool)
    consensus = np.asarray(consensus, dtype=float)
    n = len(coords)
    if coords.shape != (n, 2) or flagged.shape != (n,) or consensus.shape != (n,):
        raise ValueError("coords must be n x 2, flagged and consensus n values each")
    fig = Figure(figsize=(9, 7.5))
    FigureCanvasAgg(fig)
    ax = fig.add_axes((0.07, 0.14, 0.78, 0.76))
    cax = fig.add_axes((0.87, 0.14, 0.025, 0.76))
    span = float(np.ptp(coords, axis=0).max()) or 1.0
    size = float(np.clip(8000 / max(n, 1), 1, 12))  # dots shrink as records multiply
    x, y = coords[~flagged].T
    ax.scatter(x, y, s=size, c="0.55", alpha=0.45, linewidths=0)
    order = np.flatnonzero(flagged)[np.argsort(consensus[flagged], kind="stable")]  # highest on top
    low, high = (float(consensus[order].min()), float(consensus[order].max())) if len(order) else (0, 1)
    if high - low < 0.01:
        low = max(0.0, high - 0.01)
    x, y = coords[order].T
    points = ax.scatter(x, y, s=28, c=consensus[order], cmap="plasma", vmin=low, vmax=high,
                        marker="^", edgecolors="0.1", linewidths=0.5, zorder=3)
    fig.colorbar(points, cax=cax).set_label("consensus (flagged records)")
    outlined = 0
    if groups is not None:
        for gid in groups.large_ids:
            centre = np.median(coords[groups.members(gid)], axis=0)
            ax.annotate(f"ordinary cluster {gid} ({groups.size_of(gid):,})", centre, ha="center",
                        color="0.35", fontsize=8, style="italic", zorder=4)
        for rank, gid in enumerate(groups.small_ids):
            outline = _outline(coords[groups.members(gid)], MARGIN * span)
            ax.plot(*outline.T, color="0.1", linewidth=1.1, zorder=4)
            outlined += 1
            if rank < MAX_LABELS:
                top = outline[np.argmax(outline[:, 1])]
                ax.annotate(f"group {gid} ({groups.size_of(gid)})", top, xytext=(0, 4),
                            textcoords="offset points", ha="center", va="bottom", fontsize=8, zorder=5,
                            bbox={"boxstyle": "round,pad=0.2", "fc": "white", "ec": "0.1", "lw": 0.6,
                                  "alpha": 0.85})
    ax.set_xlabel("map axis 1 (no units)")
    ax.set_ylabel("map axis 2 (no units)")
    ax.set_xticks([])
    ax.set_yticks([])
    ax.set_aspect("equal", adjustable="datalim")
    fig.text(0.07, 0.955, title, fontsize=12, va="center")
    if subtitle:
        fig.text(0.07, 0.922, subtitle, fontsize=8.5, color="0.3", va="center")
    handles = [
        Line2D([], [], ls="", marker="o", ms=4, color="0.6", label=f"ordinary record ({n - len(order):,})"),
        Line2D([], [], ls="", marker="^", ms=7, mfc="#f0a030", mec="0.1",
               label=f"flagged record ({len(order):,})"),
    ]
    if outlined:
        handles.append(Line2D([], [], color="0.1", lw=1.1, label="group of records (id, size)"))
    fig.legend(handles=handles, loc="lower left", bbox_to_anchor=(0.07, 0.02), ncol=3, frameon=False,
               fontsize=9)
    path = Path(path)
    with atomic_output(path, parameter="path") as tmp:
        fig.savefig(tmp, dpi=dpi, format="png")
    return path


def _outline(points: np.ndarray, margin: float) -> np.ndarray:
    """A closed outline around the points: the convex hull of each point widened to a 16-gon of radius
    ``margin``, so one point, two points or points on a line still get an area."""
    angles = np.linspace(0, 2 * np.pi, 16, endpoint=False)
    ring = margin * np.column_stack([np.cos(angles), np.sin(angles)])
    widened = (points[:, None, :] + ring[None, :, :]).reshape(-1, 2)
    hull = widened[ConvexHull(widened).vertices]
    return np.vstack([hull, hull[:1]])
