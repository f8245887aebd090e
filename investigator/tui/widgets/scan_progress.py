"""The progress of slow work (the scan, the UMAP map): a bar, the current stage, and how to cancel."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.containers import Horizontal
from textual.widgets import Label, ProgressBar

from investigator.tui.plain import plain


class ScanProgress(Horizontal):
    DEFAULT_CSS = """
    ScanProgress { height: 1; display: none; }
    ScanProgress.running { display: block; }
    ScanProgress ProgressBar { width: auto; }
    ScanProgress #bar { width: 24; }
    ScanProgress #percentage { width: 5; }
    ScanProgress Label { width: 1fr; padding-left: 1; text-wrap: nowrap; text-overflow: ellipsis; }
    """

    def compose(self) -> ComposeResult:
        yield ProgressBar(total=100, show_eta=False, id="scan-bar")
        yield Label("", id="scan-stage")

    def __init__(self, follows: str = "progress", cancel: str = "esc cancels", **kwargs) -> None:
        """``follows``: the app's reactive this shows ((stage, fraction) while the work runs, None otherwise);
        ``cancel``: how to stop it, in words."""
        super().__init__(**kwargs)
        self.follows, self.cancel = follows, cancel

    def on_mount(self) -> None:
        self.watch(self.app, self.follows, self._show)

    def _show(self, progress: tuple[str, float] | None) -> None:
        self.set_class(progress is not None, "running")
        if progress is not None:
            stage, fraction = progress
            self.query_one(ProgressBar).update(progress=round(100 * fraction))
            self.query_one("#scan-stage", Label).update(plain(f"{stage} ({self.cancel})"))
