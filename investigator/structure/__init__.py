"""Structure among the records: small groups versus lone outliers, what a group shares, and a 2-D map.

* :func:`find_groups` (``groups.py``): small dense groups and large clusters ("kinds of normal") in the
  prepared feature space, and a ``pattern`` per flagged record (``group`` or ``isolated``);
* :func:`group_profile` (``profile.py``): what a group's members share that the rest does not;
* :func:`embed` (``map.py``): a 2-D map of all records (UMAP, or PCA for tiny data or when asked).

The map as a PNG is drawn by investigator/output/map_plot.py.
"""

from __future__ import annotations

from investigator.structure.groups import Grouping, find_groups
from investigator.structure.map import MapResult, embed
from investigator.structure.profile import group_profile

__all__ = ["Grouping", "MapResult", "embed", "find_groups", "group_profile"]
