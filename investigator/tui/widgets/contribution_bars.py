"""Bar charts of the feature contributions per method, from an explanation's ``contributions``.

Bars are shares of what pushes the record out (they add up to 100%); features that pull it toward ordinary
(a negative robust_distance value: given the others, the feature brings the record closer to the centre) are
named on a line of their own, in words, not as negative bars.
"""

from __future__ import annotations

from rich.text import Text
from textual.widgets import Static

from investigator.explain.explanation import Contribution, Explanation
from investigator.printable import printable
from investigator.tui.plain import ellipsis


def bars_text(contributions: dict[str, tuple[Contribution, ...]], flags: dict[str, bool], width: int = 80,
              top: int = 4) -> Text:
    out = Text()
    # The names' column fits the longest name shown, up to a quarter of the width (at least 16): a calendar
    # part ("claim_date: weekday") is whole at 80 columns; a longer name ends with an ellipsis, never cut bare.
    name_w = min(max(16, width // 4),
                 max((len(printable(c.feature)) for v in contributions.values() for c in v[:top]), default=8))
    bar_w = max(8, width - name_w - 12)
    for method, items in contributions.items():
        mark = "flags it" if flags.get(method) else "does not flag it"
        out.append(f"{method}", style="bold")
        out.append(f" ({mark})\n", style="" if flags.get(method) else "dim")
        if not items:
            out.append("  (no contribution)\n", style="dim")
        for c in [c for c in items if c.value > 0][:top]:
            n = max(0, min(bar_w, round(c.share * bar_w)))
            out.append(f"  {ellipsis(printable(c.feature), name_w):<{name_w}} ")
            out.append(f"{'█' * n:<{bar_w}}", style="bold" if flags.get(method) else "")
            out.append(f" {c.share:>5.0%}\n")
        pulling = [printable(c.feature) for c in items if c.value < 0][:3]
        if pulling:
            verb = "makes" if len(pulling) == 1 else "make"
            out.append(f"  {', '.join(pulling)} {verb} it look more ordinary\n", style="dim")
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
