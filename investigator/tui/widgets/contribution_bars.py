"""Bar charts of the feature contributions per method, from an explanation's ``contributions``.

A negative share (robust_distance: the feature brings the record closer to the centre) is drawn with ░ and
a minus sign, so the direction reads without colour.
"""

from __future__ import annotations

from rich.text import Text
from textual.widgets import Static

from investigator.explain.explanation import Contribution, Explanation
from investigator.printable import printable


def bars_text(contributions: dict[str, tuple[Contribution, ...]], flags: dict[str, bool], width: int = 80,
              top: int = 4) -> Text:
    out = Text()
    name_w = min(16, max((len(printable(c.feature)) for v in contributions.values() for c in v[:top]),
                         default=8))
    bar_w = max(8, width - name_w - 12)
    for method, items in contributions.items():
        mark = "flags it" if flags.get(method) else "does not flag it"
        out.append(f"{method}", style="bold")
        out.append(f" ({mark})\n", style="" if flags.get(method) else "dim")
        if not items:
            out.append("  (no contribution)\n", style="dim")
        for c in items[:top]:
            share = c.share
            n = max(0, min(bar_w, round(abs(share) * bar_w)))
            bar = ("█" if share >= 0 else "░") * n
            out.append(f"  {printable(c.feature)[:name_w]:<{name_w}} ")
            out.append(f"{bar:<{bar_w}}", style="bold" if flags.get(method) else "")
            out.append(f" {share:>+5.0%}\n")
    return out


class ContributionBars(Static):
    """Set with ``show(explanation)``; redrawn at the widget's width."""

    DEFAULT_CSS = "ContributionBars { height: auto; }"

    def __init__(self, **kwargs) -> None:
        super().__init__("", **kwargs)
        self.explanation: Explanation | None = None

    def show(self, explanation: Explanation | None) -> None:
        self.explanation = explanation
        self._draw()

    def on_resize(self) -> None:
        self._draw()

    def _draw(self) -> None:
        e = self.explanation
        if e is None:
            self.update("")
            return
        flags = {k: m.flag for k, m in e.method_scores.items()}
        self.update(bars_text(e.contributions, flags, width=max(40, self.size.width or 80)))
