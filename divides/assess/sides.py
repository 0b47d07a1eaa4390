"""Sides of a divide and the common base level: moved to :mod:`divides.terrain.sides`.

The names stay importable from here (and from :mod:`divides.assess`) so existing code keeps working.
"""

from divides.terrain.sides import (  # noqa: F401  (re-exported public names)
    EDGES,
    BaseLevel,
    Side,
    Sides,
    SideSpec,
    common_base_level,
    default_snap_radius_m,
    parse_side,
    resolve_side,
    resolve_sides,
)

__all__ = ["EDGES", "SideSpec", "Side", "Sides", "BaseLevel", "parse_side", "resolve_side", "resolve_sides",
           "common_base_level", "default_snap_radius_m"]
