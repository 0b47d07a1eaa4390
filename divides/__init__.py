"""divides: is a drainage divide stable or moving?

The public entry points are listed in ``__all__``; see the user guide in ``docs/``.
Names are imported on first use (PEP 562), so ``import divides`` and the command
line's ``--help`` stay fast.
"""

from __future__ import annotations

import importlib
from typing import Any

__version__ = "0.1.0"

# public name -> module that defines it
_EXPORTS = {
    "DividesError": "divides.errors",
    "Dem": "divides.io.dem",
    "read_dem": "divides.io.reading",
    "Conditioned": "divides.terrain.conditioning",
    "condition": "divides.terrain.conditioning",
    "FlowGraph": "divides.terrain.routing",
    "route": "divides.terrain.routing",
    "Channels": "divides.terrain.channels",
    "extract_channels": "divides.terrain.channels",
    "Divide": "divides.terrain.divide_lines",
    "divide_between": "divides.terrain.divide_lines",
    "divide_network": "divides.terrain.divide_lines",
    "parse_side": "divides.terrain.sides",
    "resolve_side": "divides.terrain.sides",
    "resolve_sides": "divides.terrain.sides",
    "common_base_level": "divides.terrain.sides",
    "Assessment": "divides.assess.assessment",
    "AssessConfig": "divides.config",
    "simulate": "divides.model.simulate",
    "Forecast": "divides.outlook",
    "forecast": "divides.outlook",
    "write": "divides.report.writer",
}

__all__ = sorted([*_EXPORTS, "assess", "__version__"])


def __getattr__(name: str) -> Any:
    if name == "assess":  # the room is itself callable: divides.assess(dem, side_a, side_b, ...)
        return importlib.import_module("divides.assess")
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'divides' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return __all__
