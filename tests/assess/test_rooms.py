"""The per-side science sits below the assessment: no import of `divides.assess` from lower rooms."""

from __future__ import annotations

import ast
from pathlib import Path

import divides

LOWER_ROOMS = ("io", "terrain", "profiles")


def _imported_modules(path: Path) -> set[str]:
    names = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            names |= {alias.name for alias in node.names}
        elif isinstance(node, ast.ImportFrom) and node.module:
            names.add(node.module)
    return names


def test_lower_rooms_never_import_the_assessment_not_even_for_type_hints():
    # The project's layering rule (DEVELOPERS.md, "Rooms"): io -> terrain -> profiles -> assess ->
    # report. Every import statement counts, including those under `if TYPE_CHECKING:`.
    package = Path(divides.__file__).parent
    offenders = []
    for room in LOWER_ROOMS:
        for path in sorted((package / room).glob("*.py")):
            bad = {m for m in _imported_modules(path) if m == "divides.assess" or m.startswith("divides.assess.")}
            if bad:
                offenders.append(f"{room}/{path.name}: {sorted(bad)}")
    assert offenders == []


def test_sides_keep_their_public_names():
    # Moved to divides.terrain.sides; the old names still work (issue 11 keeps the public API).
    from divides.assess import BaseLevel, Sides, common_base_level, parse_side, resolve_sides
    from divides.terrain import sides

    assert (BaseLevel, Sides, common_base_level, parse_side, resolve_sides) == (
        sides.BaseLevel, sides.Sides, sides.common_base_level, sides.parse_side, sides.resolve_sides)
    assert divides.common_base_level is sides.common_base_level
