"""divides: is a drainage divide stable or moving?

The public entry points are listed in ``__all__``; see the user guide in ``docs/``.
"""

from divides.errors import DividesError
from divides.io.dem import Dem
from divides.terrain import Conditioned, FlowGraph, condition, route

__version__ = "0.1.0"


def read_dem(path, *, bounds=None, **options):  # noqa: D103 - documented in divides.io.reading
    from divides.io.reading import read_dem as _read_dem

    return _read_dem(path, bounds=bounds, **options)


read_dem.__doc__ = "Read a single-band DEM (GeoTIFF or any raster rasterio opens); see divides.io.reading.read_dem."

__all__ = ["Conditioned", "Dem", "DividesError", "FlowGraph", "condition", "read_dem", "route", "__version__"]
