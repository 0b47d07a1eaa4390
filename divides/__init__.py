"""divides: is a drainage divide stable or moving?

The public entry points are listed in ``__all__``; see the user guide in ``docs/``.
"""

from divides.assess.sides import common_base_level, parse_side, resolve_side, resolve_sides
from divides.errors import DividesError
from divides.io.dem import Dem
from divides.io.reading import read_dem
from divides.terrain import Conditioned, FlowGraph, condition, route
from divides.terrain.channels import Channels, extract_channels
from divides.terrain.divide_lines import Divide, divide_between, divide_network

__version__ = "0.1.0"

__all__ = [
    "Channels",
    "Conditioned",
    "Dem",
    "Divide",
    "DividesError",
    "FlowGraph",
    "__version__",
    "common_base_level",
    "condition",
    "divide_between",
    "divide_network",
    "extract_channels",
    "parse_side",
    "read_dem",
    "resolve_side",
    "resolve_sides",
    "route",
]
