"""What an ordinary record looks like, feature by feature: typical ranges (within the record's own category
where a category takes part in the scan), the observed range of ordinary records, and whole-number columns.

* Typical range of a number: the quartiles (and median) of the ordinary records' values as read, in the
  column's own units (linear interpolation between order statistics, as pandas and NumPy do by default).
* Grouped: when categorical features take part in the scan, each numeric feature is grouped by the one whose
  levels explain most of its variation among ordinary records (the largest correlation ratio eta squared,
  on the values the methods saw, i.e. after any log). A record's typical range is then that of the ordinary
  records of its own level, provided the level has at least ``MIN_GROUP`` of them (20: common practice for
  a quartile to mean something); below that the overall range is used and the range says so.
* One rule for direction words: a value is ``higher`` than typical above the third quartile of its typical
  range, ``lower`` below the first, and ``within`` the typical range otherwise. A feature inside its range
  that still carries a large share of the record's score (``COMBINATION_SHARE``) is ``combination``: its
  share comes from its combination with other features, never "typical".
* Bounds for the smallest change: the lowest and highest value among ordinary records, and whether every
  one of them is a whole number (counts, codes, ratings, hours): a change then stays whole and in range.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from investigator.explain.explanation import Typical, TypicalLevel, TypicalRange
from investigator.prepare.features import MISSING_LEVEL, Features
from investigator.prepare.roles import CATEGORICAL

# Smallest adjusted eta squared for a category to give a feature its typical ranges: 0.06, a 'medium' effect in
# Cohen's conventions (common practice, from memory).
MIN_EFFECT = 0.06
MIN_GROUP = 20  # ordinary records a category level needs for its own typical range (common practice)
COMBINATION_SHARE = 0.25  # a mean share this large is never called typical


@dataclass(frozen=True, slots=True)
class Bounds:
    """The observed range of ordinary records for one numeric feature, and whether all are whole numbers."""

    low: float
    high: float
    whole: bool


@dataclass(frozen=True, slots=True)
class Grouping:
    """A numeric feature's typical ranges per level of a categorical feature (levels with enough records)."""

    column: int  # the categorical feature's index
    name: str
    ranges: dict[str, TypicalRange]
    counts: dict[str, int]  # ordinary records per level, all levels


@dataclass(frozen=True)
class TypicalValues:
    """Per feature (in the order of the features): the overall typical value, the grouping if any, and the
    bounds of numeric features."""

    overall: tuple[Typical, ...]
    groupings: dict[int, Grouping]
    bounds: dict[int, Bounds]

    def __len__(self) -> int:
        return len(self.overall)

    def __getitem__(self, j: int) -> Typical:
        return self.overall[j]

    def of(self, features: Features, i: int, j: int) -> Typical:
        """The typical value of feature ``j`` for record ``i`` of ``features``: its own category's range
        when the feature is grouped and the level has enough ordinary records, else the overall one."""
        g = self.groupings.get(j)
        if g is None:
            return self.overall[j]
        level = str(features.levels[g.column][i])
        found = g.ranges.get(level)
        if found is not None:
            return found
        base = self.overall[j]
        assert isinstance(base, TypicalRange)
        n = g.counts.get(level, 0)
        note = (f"only {n} ordinary record{'s' if n != 1 else ''} with {g.name} = {level} "
                f"(fewer than {MIN_GROUP}): overall range")
        return TypicalRange(base.median, base.q1, base.q3, base.records, None, None, note)

    def for_record(self, features: Features, i: int) -> tuple[Typical, ...]:
        return tuple(self.of(features, i, j) for j in range(len(self.overall)))


def _range(values: np.ndarray, group: str | None = None, level: str | None = None) -> TypicalRange:
    q1, med, q3 = (float(v) for v in np.quantile(values, [0.25, 0.5, 0.75]))
    return TypicalRange(med, q1, q3, int(len(values)), group, level, None)


def build_typical(features: Features, members: np.ndarray) -> TypicalValues:
    """Typical values among the records at ``members`` of ``features`` (the ordinary records)."""
    overall: list[Typical] = []
    bounds: dict[int, Bounds] = {}
    categorical = [j for j, s in enumerate(features.specs) if s.role == CATEGORICAL]
    groupings: dict[int, Grouping] = {}
    for j, spec in enumerate(features.specs):
        if spec.role == CATEGORICAL:
            share = pd.Series(features.levels[j][members]).value_counts(normalize=True)
            overall.append(TypicalLevel(str(share.index[0]), float(share.iloc[0])))
            continue
        keep = members[~features.imputed[members, j]]
        if len(keep) == 0:
            # No ordinary record has a value here (a sparse column whose values are all in flagged records):
            # what is typical is to have none, as the category encoding would say.
            overall.append(TypicalLevel(MISSING_LEVEL, 1.0))
            continue
        raw = features.raw[keep, j]
        raw = np.where(np.isfinite(raw), raw, spec.to_original(features.transformed[keep, j]))
        overall.append(_range(raw))
        bounds[j] = Bounds(float(raw.min()), float(raw.max()), bool(np.all(np.mod(raw, 1) == 0)))
        g = _best_grouping(features, keep, j, categorical)
        if g is not None:
            levels = pd.Series(features.levels[g][keep]).astype(str).to_numpy()
            frame = pd.DataFrame({"level": levels, "value": raw})
            counts = frame["level"].value_counts().to_dict()
            ranges = {str(level): _range(part["value"].to_numpy(), features.names[g], str(level))
                      for level, part in frame.groupby("level", sort=False) if len(part) >= MIN_GROUP}
            if ranges:
                groupings[j] = Grouping(g, features.names[g], ranges, {str(k): int(v) for k, v in counts.items()})
    return TypicalValues(tuple(overall), groupings, bounds)


def _best_grouping(features: Features, keep: np.ndarray, j: int, categorical: list[int]) -> int | None:
    """The categorical feature whose levels explain most of feature j's variation among the records at
    ``keep``, by eta squared adjusted for the number of levels as R squared is (so an identifier-like column
    with hundreds of levels does not win by chance); None when none explains at least ``MIN_EFFECT``."""
    t = features.transformed[keep, j]
    n = len(t)
    with np.errstate(over="ignore", invalid="ignore"):  # a column near the float limit has no finite spread
        total = float(((t - t.mean()) ** 2).sum())
    if not np.isfinite(total) or total <= 0:
        return None
    best, best_eta = None, MIN_EFFECT
    for g in categorical:
        labels = pd.Series(features.levels[g][keep]).astype(str).to_numpy()
        k = len(np.unique(labels))
        if k < 2 or n - k < 1:
            continue
        means = pd.Series(t).groupby(labels).transform("mean")
        eta = float(((means.to_numpy() - t.mean()) ** 2).sum()) / total
        adjusted = 1.0 - (1.0 - eta) * (n - 1) / (n - k)
        if adjusted >= best_eta:
            best, best_eta = g, adjusted
    return best


def direction(role: str, value, rarity_z: float, typical: Typical, share: float) -> str:
    """The one rule for direction words (module docstring): ``higher`` / ``lower`` outside the typical range,
    ``rarer`` for a rare category level, ``combination`` for a feature inside its range that carries a large
    share, else ``within`` (numbers) or ``common`` (a level at least as common as a typical record's)."""
    if role == CATEGORICAL:
        if rarity_z > 0:
            return "rarer"
        return "combination" if share >= COMBINATION_SHARE else "common"
    if isinstance(typical, TypicalRange) and value is not None:
        if value > typical.q3:
            return "higher"
        if value < typical.q1:
            return "lower"
    return "combination" if share >= COMBINATION_SHARE else "within"
