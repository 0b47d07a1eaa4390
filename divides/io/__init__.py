"""Reading and writing: the only room that touches files."""

from divides.io.dem import Dem
from divides.io.geodesy import Ellipsoid, row_cell_sizes
from divides.io.reading import read_dem
from divides.io.writing import atomic_write, write_json, write_raster, write_text

__all__ = [
    "Dem",
    "Ellipsoid",
    "row_cell_sizes",
    "read_dem",
    "atomic_write",
    "write_raster",
    "write_text",
    "write_json",
]
