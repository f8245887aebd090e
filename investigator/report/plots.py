"""The report's figures: static PNG images drawn with matplotlib's Agg renderer, returned as bytes.

Deterministic by construction: the Figure API with the Agg canvas (no pyplot, no GUI backend, no global
state), matplotlib's default style whatever the user's matplotlibrc says, and PNG metadata without the
"Software" entry (the only varying chunk matplotlib would write). The same data gives the same bytes.
"""

from __future__ import annotations

import io

import matplotlib.style
import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import FixedFormatter, FixedLocator, NullFormatter

ORDINARY = "#8da0b3"   # records not flagged
FLAGGED = "#c0392b"    # flagged records (the browser test looks for this colour on the page)
CUTOFF = "#222222"
DPI = 100
# One colour per feature in the contributions figure: the colour-blind-safe palette of Okabe & Ito (2008),
# "Color Universal Design", instead of matplotlib's default cycle, whose red/green pairs many readers cannot
# tell apart. Hex values from memory: orange, sky blue, bluish green, yellow, blue, vermillion, reddish
# purple, then black (the palette's first colour, put last here because it reads as text on a bar chart).
# ORDINARY and FLAGGED above keep their meaning (not flagged / flagged) and are not part of this cycle.
FEATURE_COLOURS = ("#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7", "#000000")


def plain(text: object, width: int = 40) -> str:
    """A label matplotlib draws as it is: ``$`` would start mathematics (and a stray one raises), a leading
    ``_`` would hide a legend entry; long labels are shortened."""
    label = str(text).replace("$", r"\$")
    label = label if len(label) <= width else label[: width - 1] + "…"
    return " " + label if label.startswith("_") else label


def _figure(width: float, height: float):
    fig = Figure(figsize=(width, height), dpi=DPI, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def _png(fig) -> bytes:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=DPI, metadata={"Software": None})
    return buffer.getvalue()


def _styled(draw):
    """Run a drawing function under matplotlib's default style, so a user's matplotlibrc changes nothing."""
    def run(*args, **kwargs) -> bytes:
        with matplotlib.style.context("default"):
            return draw(*args, **kwargs)

    return run


@_styled
def consensus_plot(consensus: np.ndarray, flagged: np.ndarray) -> bytes:
    """How consensus is spread over all records, flagged records stacked in their own colour."""
    fig = _figure(9, 3.2)
    ax = fig.add_subplot()
    values = np.nan_to_num(np.asarray(consensus, dtype=float), nan=0.0)
    _stacked(ax, values, flagged, np.linspace(0, 1, 51),
             (f"not flagged ({int((~flagged).sum()):,})", f"flagged ({int(flagged.sum()):,})"))
    ax.set_xlim(0, 1)
    ax.set_xlabel("consensus (0 to 1; higher is more unusual)")
    ax.set_ylabel("records (log scale)")
    ax.set_title("Consensus of all records")
    _legend(ax, loc="upper center")
    return _png(fig)


def _stacked(ax, values: np.ndarray, marked: np.ndarray, bins: np.ndarray, labels: tuple[str, str]) -> None:
    """A histogram on a log count axis with the marked records stacked on top in their own colour.

    Counted with numpy and drawn as two filled outlines: far quicker than one bar per bin on 100k records."""
    plain = np.histogram(values[~marked], bins=bins)[0]
    total = plain + np.histogram(values[marked], bins=bins)[0]
    floor = 0.7  # the log axis starts just under one record, so a bin of one is visible
    ax.stairs(np.maximum(total, floor), bins, baseline=floor, fill=True, color=FLAGGED, label=labels[1])
    ax.stairs(np.maximum(plain, floor), bins, baseline=floor, fill=True, color=ORDINARY, label=labels[0])
    ax.set_yscale("log")
    ax.set_ylim(floor, max(10.0, float(total.max()) * 1.6))


def _legend(ax, **kwargs) -> None:
    """The legend with the unmarked records first (``_stacked`` draws the marked ones first)."""
    handles, names = ax.get_legend_handles_labels()
    order = [1, 0, *range(2, len(handles))]
    ax.legend([handles[i] for i in order], [names[i] for i in order], frameon=False, **kwargs)


def _bins(scores: np.ndarray, cutoff: float) -> tuple[np.ndarray, bool]:
    """Histogram bins; logarithmic when the scores are positive and span orders of magnitude."""
    low, high = float(np.min(scores)), float(np.max(scores))
    if np.isfinite(cutoff):
        low, high = min(low, cutoff), max(high, cutoff)
    if low > 0 and high / low > 8:
        return np.geomspace(low, high, 41), True
    if high <= low:
        high = low + 1.0
    return np.linspace(low, high, 41), False


@_styled
def method_plots(methods: dict[str, tuple[np.ndarray, float, np.ndarray]]) -> bytes:
    """Per method: the distribution of its scores, the records above its cutoff in their own colour, and the
    cutoff as a dashed line. ``methods`` maps a key to (scores, cutoff, above the cutoff)."""
    return _png(method_figure(methods))


def method_figure(methods: dict[str, tuple[np.ndarray, float, np.ndarray]]):
    """The figure of :func:`method_plots` (the tests measure its tick labels)."""
    n = len(methods)
    cols = 2 if n > 1 else 1
    rows = (n + cols - 1) // cols
    fig = _figure(9, 2.6 * rows)
    axes = fig.subplots(rows, cols, squeeze=False).ravel()
    for ax, (key, (scores, cutoff, above)) in zip(axes, methods.items(), strict=False):
        finite = np.isfinite(scores)
        s, up = scores[finite], above[finite]
        if len(s) == 0:
            ax.set_title(f"{key}: no finite scores")
            continue
        bins, log = _bins(s, cutoff)
        _stacked(ax, s, up, bins, ("below the cutoff", f"above ({int(up.sum()):,})"))
        if np.isfinite(cutoff):
            ax.axvline(cutoff, color=CUTOFF, linestyle="--", linewidth=1.2, label=f"cutoff {cutoff:.4g}")
        if log:
            ax.set_xscale("log")
            _log_ticks(ax.xaxis, float(bins[0]), float(bins[-1]))
        ax.set_title(key)
        ax.set_xlabel("score" + (" (log scale)" if log else ""))
        ax.set_ylabel("records (log scale)")
        _legend(ax, loc="upper right", fontsize="small")
    for ax in axes[n:]:
        ax.set_visible(False)
    fig.canvas.draw()
    return fig


def _log_ticks(axis, low: float, high: float, most: int = 5) -> None:
    """Few labelled ticks on a log axis, as plain numbers: 1, 2 and 5 times the powers of ten in the range,
    thinned to at most ``most`` (matplotlib's own labels its minor ticks too when the range is under about a
    decade: "2x10^-1", "3x10^-1", ... overlap on a narrow panel)."""
    ticks = [t * 10.0**e for e in range(int(np.floor(np.log10(low))) - 1, int(np.ceil(np.log10(high))) + 1)
             for t in (1, 2, 5) if low <= t * 10.0**e <= high]
    if len(ticks) > most:
        decades = [t for t in ticks if np.isclose(np.log10(t), round(np.log10(t)))]
        keep = decades if len(decades) >= 2 else ticks
        ticks = keep[::-(-len(keep) // most)]  # every k-th, k = ceil(len / most)
    if len(ticks) < 2:  # a range inside one step: its two ends
        ticks = [low, high]
    axis.set_major_locator(FixedLocator(ticks))
    axis.set_major_formatter(FixedFormatter([f"{t:,.0f}" if t >= 1 else np.format_float_positional(t, 3, trim="-")
                                             for t in ticks]))
    axis.set_minor_formatter(NullFormatter())


@_styled
def contributions_plot(cases: list[tuple[str, list[tuple[str, float]]]]) -> bytes:
    """One horizontal bar per case (the top case on top), split into the shares of its top features in the
    combined view; each feature keeps one colour across the bars."""
    features: list[str] = []
    for _, parts in cases:
        for name, _share in parts:
            if name not in features:
                features.append(name)
    colour = {f: FEATURE_COLOURS[i % len(FEATURE_COLOURS)] for i, f in enumerate(features)}
    fig = _figure(9, 1.8 + 0.38 * len(cases))
    ax = fig.add_subplot()
    y = np.arange(len(cases))[::-1]
    drawn: set[str] = set()
    for yi, (_, parts) in zip(y, cases, strict=True):
        left = 0.0
        for name, share in parts:
            label = plain(name) if name not in drawn else None
            drawn.add(name)
            ax.barh(yi, share, left=left, color=colour[name], edgecolor="white", linewidth=0.6, label=label)
            left += share
    ax.set_yticks(y, [plain(label) for label, _ in cases])
    ax.set_xlim(0, 1)
    ax.set_xlabel("share of what makes the record stand out (mean over the methods)")
    ax.set_title("What makes the top cases stand out")
    fig.legend(loc="outside lower center", fontsize="small", frameon=False, ncols=min(5, max(1, len(features))))
    return _png(fig)


@_styled
def map_plot(xy: np.ndarray, flagged: np.ndarray, labels: list[tuple[float, float, str]]) -> bytes:
    """The 2-D map: ordinary records faint, flagged records in their colour, the top cases numbered."""
    fig = _figure(9, 6)
    ax = fig.add_subplot()
    ax.scatter(xy[~flagged, 0], xy[~flagged, 1], s=6, color=ORDINARY, alpha=0.35, linewidths=0,
               label=f"not flagged ({int((~flagged).sum()):,})")
    ax.scatter(xy[flagged, 0], xy[flagged, 1], s=20, color=FLAGGED, edgecolors="white", linewidths=0.4,
               label=f"flagged ({int(flagged.sum()):,})")
    for x, y, text in labels:
        ax.annotate(plain(text), (x, y), xytext=(4, 4), textcoords="offset points", fontsize=8)
    ax.set_xlabel("map axis 1 (no units)")
    ax.set_ylabel("map axis 2 (no units)")
    ax.set_title("Map of all records: nearby points are similar records")
    ax.legend(loc="upper right", frameon=False)
    return _png(fig)
