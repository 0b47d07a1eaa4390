"""Cells where a weighting raster (runoff, erodibility, uplift) has no value, and the caution they call for.

χ reads such a cell as the raster's typical (reference) value (:func:`divides.profiles.chi.chi_weights`):
the number there is not the user's, so an assessment and a screening record how many cells it concerns
and say so beside their verdicts.
"""

from __future__ import annotations

import numpy as np

from divides.io.dem import Dem
from divides.io.memory import row_blocks

__all__ = ["raster_holes", "raster_holes_cells", "raster_holes_note"]


def raster_holes(dem: Dem, grid: np.ndarray | float) -> int:
    """Valid DEM cells where ``grid`` has no finite value (0 for a single value), a block of rows at a time.

    Examples
    --------
    >>> dem = Dem.from_array(np.ones((3, 4)), cell_size=10.0)
    >>> raster_holes(dem, np.array([[1.0, np.nan, 1, 1], [1, 1, 1, 1], [np.nan, np.nan, 1, 1]]))
    3
    """
    arr = np.asarray(grid)
    if arr.shape != dem.shape:
        return 0
    return sum(int(np.count_nonzero(dem.valid[rows] & ~np.isfinite(arr[rows]))) for rows in row_blocks(dem.shape))


def raster_holes_cells(dem: Dem, **rasters: np.ndarray | float | None) -> dict[str, int]:
    """:func:`raster_holes` of each raster given (those that are not None), by name."""
    return {name: raster_holes(dem, grid) for name, grid in rasters.items() if grid is not None}


def raster_holes_note(parameters: dict, n_valid: int) -> str | None:
    """The caution for a weighting raster with no value on some of the DEM's cells (``raster_holes_cells`` of
    ``parameters``; read there as its reference value); None otherwise.

    Examples
    --------
    >>> raster_holes_note({"raster_holes_cells": {"runoff": 100, "uplift": 0}}, 36000)
    "The runoff raster has no value on 100 of the DEM's cells (0.28 %); χ read its typical (reference) value there."
    >>> raster_holes_note({"raster_holes_cells": {"runoff": 0}}, 36000)
    """
    holes = {k: v for k, v in (parameters.get("raster_holes_cells") or {}).items() if v}
    if not holes:
        return None
    parts = [f"The {name} raster has no value on {n} of the DEM's cells ({100 * n / max(n_valid, 1):.2g} %)"
             for name, n in holes.items()]
    return "; ".join(parts) + "; χ read its typical (reference) value there."
