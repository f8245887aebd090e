"""The review store: verdicts and notes that last across runs (see docs/review.md).

``ReviewStore`` keeps an append-only history in SQLite; :mod:`.matching` finds each verdict's record in the
current table (by key, or by content fingerprint without one). Nothing here imports pandas at import time.
"""

from investigator.review.store import VERDICTS, Case, Entry, ReviewStore, default_store_path, group_case

__all__ = ["VERDICTS", "Case", "Entry", "ReviewStore", "default_store_path", "group_case"]
