"""Sides and the base level moved below the assessment (tests/test_rooms.py checks the imports); the old names still work."""

from __future__ import annotations

import divides


def test_sides_keep_their_public_names():
    # Moved to divides.terrain.sides; the old names still work (issue 11 keeps the public API).
    from divides.assess import BaseLevel, Sides, common_base_level, parse_side, resolve_sides
    from divides.terrain import sides

    assert (BaseLevel, Sides, common_base_level, parse_side, resolve_sides) == (
        sides.BaseLevel, sides.Sides, sides.common_base_level, sides.parse_side, sides.resolve_sides)
    assert divides.common_base_level is sides.common_base_level
