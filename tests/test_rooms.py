"""Rooms: imports go downstream only (DESIGN.md: io -> terrain -> profiles -> assess -> report; cli on top).

Checked on the source: every import statement counts, including those under ``if TYPE_CHECKING:``.
"""

from __future__ import annotations

import ast
from pathlib import Path

import divides

PACKAGE = Path(divides.__file__).resolve().parent


def _imports(path: Path) -> set[str]:
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            found |= {a.name for a in node.names}
        elif isinstance(node, ast.ImportFrom) and node.module:
            found.add(node.module)
    return found


def _offenders(rooms: tuple[str, ...], forbidden: tuple[str, ...]) -> list[str]:
    offenders = []
    for room in rooms:
        for path in sorted((PACKAGE / room).glob("*.py")):
            bad = {m for m in _imports(path) if any(m == f or m.startswith(f + ".") for f in forbidden)}
            if bad:
                offenders.append(f"{room}/{path.name}: {sorted(bad)}")
    return offenders


def test_lower_rooms_never_import_the_assessment_not_even_for_type_hints():
    # The per-side science sits below the assessment (issue 11: sides and the base level live in terrain).
    assert _offenders(("io", "terrain", "profiles"), ("divides.assess",)) == []


def test_no_upstream_module_imports_report_or_cli():
    # "Assessment is data: writing it is the report room's job" (DESIGN.md).
    assert _offenders(("io", "terrain", "profiles", "assess"), ("divides.report", "divides.cli")) == []
