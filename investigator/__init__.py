"""investigator: find the records in a table that do not fit with the rest, and say why.

    >>> import investigator
    >>> result = investigator.scan("claims.csv", id="claim_id")
    >>> result.flagged.sum(), result.write("scan.json")

Flags are leads for a person to review, not proof of error or fraud.
"""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["InputError", "ScanOptions", "ScanResult", "__version__", "check", "scan", "scan_dataset"]


def __getattr__(name: str):
    # Deferred so that `investigator --help` and the first TUI frame do not pay for scikit-learn.
    if name in ("scan", "check"):
        from investigator.pipeline import engine
        return getattr(engine, name)
    if name == "scan_dataset":  # the Dask path (docs/large.md)
        from investigator.pipeline.dask_engine import scan_dataset

        return scan_dataset
    if name == "ScanResult":
        from investigator.pipeline.result import ScanResult

        return ScanResult
    if name == "ScanOptions":
        from investigator.pipeline.options import ScanOptions

        return ScanOptions
    if name == "InputError":
        from investigator.errors import InputError

        return InputError
    raise AttributeError(f"module 'investigator' has no attribute '{name}'")
