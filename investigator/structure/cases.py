"""Each small group as one case: its members, how many are flagged, and its profile.

What the JSON's ``groups`` list holds (``to_dict()``), what the report and the workspace show, and what a
verdict on a group (``group:<id>``) is recorded against.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from investigator.prepare.features import Features
from investigator.structure.groups import Grouping
from investigator.structure.profile import FeatureProfile, group_profile


@dataclass(frozen=True, slots=True)
class GroupMember:
    """A member of a group: its 1-based row and its key."""

    row: int
    key: object

    def to_dict(self) -> dict:
        return {"row": self.row, "key": self.key}


@dataclass(frozen=True, slots=True)
class GroupCase:
    """One small group: its id and size, its members, how many of them are flagged, and what they share
    that the rest does not (features that differ most first)."""

    group: int
    size: int
    members: tuple[GroupMember, ...]
    flagged: int
    profile: tuple[FeatureProfile, ...]

    @property
    def keys(self) -> list:
        """The members' keys, in row order."""
        return [m.key for m in self.members]

    def to_dict(self) -> dict:
        return {"group": self.group, "size": self.size, "members": [m.to_dict() for m in self.members],
                "flagged": self.flagged, "profile": [p.to_dict() for p in self.profile]}


def group_cases(grouping: Grouping, features: Features, frame: pd.DataFrame | None, flagged: np.ndarray,
                keys: list) -> list[GroupCase]:
    """Every small group of ``grouping`` as one case; ``frame`` (the table as read) adds the columns the
    scan did not use to the profiles."""
    cases = []
    for gid in grouping.small_ids:
        members = grouping.members(gid)
        mask = np.zeros(len(features.values), dtype=bool)
        mask[members] = True
        cases.append(GroupCase(
            group=int(gid), size=int(len(members)),
            members=tuple(GroupMember(int(i) + 1, keys[i]) for i in members),
            flagged=int(flagged[members].sum()),
            profile=tuple(group_profile(mask, features, frame)),
        ))
    return cases
