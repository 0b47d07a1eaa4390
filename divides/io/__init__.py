"""Reading and writing: the only room that touches files."""

from divides.io.dem import Dem
from divides.io.geodesy import Ellipsoid, row_cell_sizes

__all__ = ["Dem", "Ellipsoid", "row_cell_sizes"]
