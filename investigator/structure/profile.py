"""What a group's members share that the rest of the records do not.

For each feature the group's typical value sits beside the rest's, with a robust difference on the scale
the scan uses, so that numbers and categories sort together:

* a number: the median in the column's own units (as read, before any log) for the group and for the
  rest, the group's range, and the difference of the medians in the scaled feature space, in robust
  standard deviations (the median is not moved by the few far values a group or the rest may hold);
* a category: the group's commonest level, its share in the group and in the rest, and the log ratio of
  the two shares, ln(share in group / share in rest), in nats: the units of the scan's rarity encoding,
  where a level e^3 = 20 times rarer counts as much as 3 robust standard deviations (docs/methods.md).
  A level the rest never has counts as if half a record of the rest had it.

Features are sorted by the size of the difference, largest first: the features that make the group differ
come first. Columns the scan did not use (dates, free text, excluded columns) follow, when the table is
given, if at least half of the group shares one value that is at least e (2.7) times as common in the
group as in the rest: a shared date or note is often what makes a pattern readable.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from investigator.prepare import magnitudes
from investigator.prepare.features import MISSING_LEVEL, Features
from investigator.prepare.roles import CATEGORICAL

SIMILAR = 0.5  # within half a robust SD (or a share ratio within e^0.5): no clear difference
SHARED = 0.5  # a column the scan did not use is shown when half the group shares one value ...
DISTINCT = 1.0  # ... that is at least e times as common in the group as in the rest


@dataclass(frozen=True, slots=True)
class FeatureProfile:
    """How one feature (or unused column) of a group compares with the rest: the typical values of both,
    the signed difference and its direction; for numbers the group's range, for levels both shares."""

    feature: str
    role: str  # the feature's role, or "other" for a column the scan did not use
    used: bool
    group: float | str
    rest: float | str
    difference: float
    direction: str
    group_range: tuple[float, float] | None = None  # numbers
    group_share: float | None = None  # levels
    rest_share: float | None = None

    def to_dict(self) -> dict:
        out = {"feature": self.feature, "role": self.role, "used": self.used, "group": self.group,
               "rest": self.rest, "difference": self.difference, "direction": self.direction}
        if self.group_range is not None:
            out["group_range"] = list(self.group_range)
        else:
            out.update(group_share=self.group_share, rest_share=self.rest_share)
        return out


def group_profile(member_mask: np.ndarray, features: Features,
                  frame: pd.DataFrame | None = None) -> list[FeatureProfile]:
    """Profile of one group against the rest, features that differ most first.

    Parameters
    ----------
    member_mask : n booleans, True for the group's members.
    features : the scan's prepared features (``ScanResult.features``).
    frame : the table as read (``ScanResult.table.frame``), for the columns the scan did not use; optional.

    Returns
    -------
    One :class:`FeatureProfile` per feature: ``feature``, ``role``, ``used``, ``group`` and ``rest``
    (typical values in the column's own units, or levels), ``difference`` (signed: robust SDs for numbers,
    nats for categories), ``direction`` (``higher`` / ``lower`` / ``more common`` / ``similar``), and
    ``group_range`` for numbers or ``group_share`` / ``rest_share`` for categories.
    """
    mask = np.asarray(member_mask, dtype=bool)
    if mask.shape != (len(features.values),) or not mask.any() or mask.all():
        raise ValueError("member_mask must hold one boolean per record, with members and non-members")
    rows = []
    for j, spec in enumerate(features.specs):
        if spec.role == CATEGORICAL:
            rows.append(FeatureProfile(spec.name, spec.role, True, **_levels(features.levels[j], mask)))
        else:
            rows.append(FeatureProfile(spec.name, spec.role, True, **_numbers(features, j, mask)))
    rows.sort(key=lambda r: -abs(r.difference))  # stable: ties keep the feature order
    if frame is not None:
        used = set(features.names)
        others = [FeatureProfile(str(c), "other", False, **_levels(_as_levels(frame[c]), mask))
                  for c in frame.columns if c not in used]
        others = [r for r in others if (r.group_share or 0.0) >= SHARED and r.difference >= DISTINCT]
        rows += sorted(others, key=lambda r: -r.difference)
    return rows


def _numbers(features: Features, j: int, mask: np.ndarray) -> dict:
    spec = features.specs[j]
    raw, scaled = features.raw[:, j], features.values[:, j]

    def typical(part: np.ndarray) -> float:
        known = raw[part][np.isfinite(raw[part])]
        if len(known):
            return magnitudes.median(known)
        # Every cell was filled: go back from the transformed median.
        return float(spec.to_original(magnitudes.median(features.transformed[part, j])))

    known = raw[mask][np.isfinite(raw[mask])]
    low, high = (float(known.min()), float(known.max())) if len(known) else (typical(mask), typical(mask))
    diff = float(np.median(scaled[mask]) - np.median(scaled[~mask]))
    direction = "similar" if abs(diff) < SIMILAR else "higher" if diff > 0 else "lower"
    return {"group": typical(mask), "rest": typical(~mask), "difference": diff, "direction": direction,
            "group_range": (low, high)}


def _levels(levels: np.ndarray, mask: np.ndarray) -> dict:
    top = _commonest(levels[mask])
    share_g = float((levels[mask] == top).mean())
    rest = levels[~mask]
    share_r = float((rest == top).mean())
    diff = float(np.log(share_g / max(share_r, 0.5 / len(rest))))
    direction = "similar" if abs(diff) < SIMILAR else "more common" if diff > 0 else "less common"
    return {"group": top, "rest": _commonest(rest), "difference": diff, "direction": direction,
            "group_share": share_g, "rest_share": share_r}


def _commonest(levels: np.ndarray) -> str:
    """The commonest level; ties go to the first in sort order, so that the profile is reproducible."""
    counts = pd.Series(levels, dtype=object).astype(str).value_counts()
    return min(counts.items(), key=lambda kv: (-kv[1], kv[0]))[0]


def _as_levels(values: pd.Series) -> np.ndarray:
    return values.astype("string").fillna(MISSING_LEVEL).to_numpy(dtype=object)
