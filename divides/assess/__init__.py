"""The assessment: sides, the common base level, across-divide contrasts and the verdict.

``divides.assess`` is both this room and the stable entry point
``divides.assess(dem, side_a, side_b, **options)``: the module object is made
callable (it forwards to :func:`divides.assess.assessment.assess`), so the
name means the same thing however the package was imported.
"""

import sys
import types

from divides.terrain.sides import (
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


class _CallableModule(types.ModuleType):
    """This package, callable as :func:`divides.assess.assessment.assess`."""

    def __call__(self, dem, side_a, side_b, **options):
        from divides.assess.assessment import assess

        return assess(dem, side_a, side_b, **options)


sys.modules[__name__].__class__ = _CallableModule
