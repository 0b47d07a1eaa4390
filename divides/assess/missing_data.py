"""Cells without data that change what the tool reads, and the cautions they call for.

- Where a weighting raster (runoff, erodibility, uplift) has no value, χ reads the raster's typical (reference)
  value (:func:`divides.profiles.chi.chi_weights`): the number there is not the user's.
- Nodata inside the DEM's data (a hole its edge does not reach: a lake masked out, a void) is read as off the DEM,
  so the valid cells around it are outlets (docs/methods.md §1), as a coast would be.

An assessment and a screening record how many cells each concerns and say so beside their verdicts.
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage

from divides.io.dem import Dem
from divides.io.memory import row_blocks

__all__ = ["raster_holes", "raster_holes_cells", "raster_holes_note", "interior_nodata_cells", "interior_nodata_note"]


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


def interior_nodata_cells(valid: np.ndarray) -> int:
    """Nodata cells in holes that do not reach the grid's edge (8-connected), whose rims drain into them as outlets.

    A nodata collar (reaching the edge) is not counted: the DEM simply ends there.

    Examples
    --------
    >>> valid = np.ones((5, 6), bool); valid[2, 2:4] = False; valid[0, 5] = False
    >>> interior_nodata_cells(valid)
    2
    """
    invalid = ~np.asarray(valid, dtype=bool)
    if not invalid.any():
        return 0
    labels, n = ndimage.label(invalid, structure=np.ones((3, 3), dtype=bool))
    reach_edge = np.zeros(n + 1, dtype=bool)
    for line in (labels[0], labels[-1], labels[:, 0], labels[:, -1]):
        reach_edge[line] = True
    counts = np.zeros(n + 1, dtype=np.int64)
    for rows in row_blocks(labels.shape):  # no grid-sized int64 copy (10^9 cells)
        counts += np.bincount(labels[rows].ravel(), minlength=n + 1)
    return int(counts[1:][~reach_edge[1:]].sum())


def interior_nodata_note(n_cells: int, n_valid: int) -> str | None:
    """The caution for nodata inside the DEM's data (:func:`interior_nodata_cells`); None when there is none.

    Examples
    --------
    >>> interior_nodata_note(120, 36000).split(":")[0]
    'The DEM has 120 nodata cells inside its data (0.33 % of the valid cells)'
    """
    if not n_cells:
        return None
    return (f"The DEM has {n_cells} nodata cells inside its data ({100 * n_cells / max(n_valid, 1):.2g} % of the valid "
            "cells): the land around them drains into them as into the sea, so a basin there ends at their rim; if "
            "they are voids in the data rather than water, fill them before this analysis.")
