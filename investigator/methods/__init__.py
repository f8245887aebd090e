"""The scoring methods, one module each, and their stable keys."""

from __future__ import annotations

from investigator.methods.base import Method
from investigator.methods.isolation import Isolation
from investigator.methods.local_density import LocalDensity
from investigator.methods.neighbor_distance import NeighborDistance
from investigator.methods.robust_distance import RobustDistance

METHODS: dict[str, type[Method]] = {
    RobustDistance.key: RobustDistance,
    LocalDensity.key: LocalDensity,
    Isolation.key: Isolation,
    NeighborDistance.key: NeighborDistance,
}
METHOD_KEYS = tuple(METHODS)

__all__ = ["METHODS", "METHOD_KEYS", "Isolation", "LocalDensity", "Method", "NeighborDistance",
           "RobustDistance"]
