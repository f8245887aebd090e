"""investigator: find the records in a table that do not fit with the rest, and say why.

    >>> import investigator
    >>> result = investigator.scan("claims.csv", id="claim_id")
    >>> result.flagged.sum(), result.write("scan.json")
    >>> print(investigator.explanation_text(result.explain("CLM-10765")))

Flags are leads for a person to review, not proof of error or fraud.
"""

from __future__ import annotations

from investigator.errors import InputError
from investigator.version import __version__

__all__ = ["InputError", "ScanOptions", "ScanResult", "__version__", "check", "explanation_text", "scan",
           "scan_dataset"]


def __getattr__(name: str):
    # Deferred: every `import investigator.<anything>` runs this file first, `investigator --help` (0.1 s) and
    # the TUI's first frame included, and the engine costs 1.9 s to import (SciPy, scikit-learn, pandas;
    # `python -c "import investigator.pipeline.engine"` on this machine), the options 1.7 s, the result 0.6 s.
    if name in ("scan", "check"):
        from investigator.pipeline import engine

        return getattr(engine, name)
    if name == "scan_dataset":  # the Dask path (docs/large.md)
        from investigator.pipeline.dask_engine import scan_dataset

        return scan_dataset
    if name == "ScanResult":
        from investigator.pipeline.result import ScanResult

        return ScanResult
    if name == "explanation_text":  # an Explanation (result.explain(...)) in words, as `investigator explain`
        from investigator.output.explanation import explanation_text

        return explanation_text
    if name == "ScanOptions":
        from investigator.pipeline.options import ScanOptions

        return ScanOptions
    raise AttributeError(f"module 'investigator' has no attribute '{name}'")
