"""The assessment: sides, the common base level, across-divide contrasts and the verdict."""

from divides.assess.sides import (
    BaseLevel,
    Side,
    Sides,
    SideSpec,
    common_base_level,
    parse_side,
    resolve_side,
    resolve_sides,
)

__all__ = [
    "BaseLevel",
    "Side",
    "SideSpec",
    "Sides",
    "common_base_level",
    "parse_side",
    "resolve_side",
    "resolve_sides",
]
