"""Structure among the records: small groups versus lone outliers, what a group shares, and a 2-D map.

* :func:`find_groups` (``groups.py``): small dense groups and large clusters ("kinds of normal") in the
  prepared feature space, and a ``pattern`` per flagged record (``group`` or ``isolated``);
* :func:`group_profile` (``profile.py``): what a group's members share that the rest does not;
* :func:`embed` (``map.py``): a 2-D map of all records (UMAP, or PCA for tiny data or when asked).

The map as a PNG is drawn by investigator/output/map_plot.py.

Imported lazily, so that importing the package does not pay for scikit-learn, UMAP or matplotlib.
"""

from __future__ import annotations

__all__ = ["Grouping", "MapResult", "embed", "find_groups", "group_profile"]


def __getattr__(name: str):
    if name in ("Grouping", "find_groups"):
        from investigator.structure import groups

        return getattr(groups, name)
    if name == "group_profile":
        from investigator.structure.profile import group_profile

        return group_profile
    if name in ("MapResult", "embed"):
        from investigator.structure import map as map_module

        return getattr(map_module, name)
    raise AttributeError(f"module 'investigator.structure' has no attribute '{name}'")
