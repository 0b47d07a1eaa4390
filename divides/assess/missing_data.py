"""Cells without data that change what the tool reads, and the cautions they call for.

- Where a weighting raster (runoff, erodibility, uplift) has no value, χ reads the raster's typical (reference)
  value (:func:`divides.profiles.chi.chi_weights`): the number there is not the user's.
- Nodata inside the DEM's data (a hole its edge does not reach: a void, or a lake masked out) is filled by
  harmonic interpolation by default, or, told so, read as off the DEM, so that the valid cells around it are
  outlets as a coast would be (docs/methods.md §1).

An assessment and a screening record how many cells each concerns and say so beside their verdicts.
"""

from __future__ import annotations

import numpy as np

from divides.io.dem import Dem
from divides.io.memory import row_blocks
from divides.terrain.voids import VoidFill

__all__ = ["raster_holes", "raster_holes_cells", "raster_holes_note", "interior_nodata_note", "filled_divide_note"]


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


def interior_nodata_note(voids: VoidFill, n_valid: int) -> str | None:
    """The caution for nodata inside the DEM's data (:func:`divides.terrain.voids.fill_voids`); None when there
    is none. ``n_valid``: valid cells of the DEM analysed (filled cells included).

    Examples
    --------
    >>> note = interior_nodata_note(VoidFill("fill", holes=2, cells=120, largest_cells=100, filled_cells=120), 36120)
    >>> note.split(":")[0]
    'The DEM has 120 nodata cells inside its data (0.33 % of the valid cells, 2 holes, the largest 100 cells)'
    >>> "filled by harmonic interpolation" in note
    True
    """
    if not voids.cells:
        return None
    share = 100 * voids.cells / max(n_valid - voids.filled_cells, 1)  # of the cells the DEM gave
    where = (f"The DEM has {voids.cells} nodata cells inside its data ({share:.2g} % "
             f"of the valid cells, {voids.holes} hole{'s' if voids.holes != 1 else ''}, the largest "
             f"{voids.largest_cells} cells)")
    if voids.filled_cells:
        return (where + ": they were filled by harmonic interpolation from their rims, so channels and divides "
                "crossing them follow a smooth surface, not measured ground; if they are water (a base level), "
                "run again with voids left as outlets (--voids outlets).")
    return (where + ": the land around them drains into them as into the sea, so a basin there ends at their rim; "
            "if they are voids in the data rather than water, fill them (--voids fill, the default).")


def filled_divide_note(share: float) -> str | None:
    """The caution for a divide that runs partly over holes filled by interpolation (``share`` of its length,
    :meth:`divides.terrain.voids.VoidFill.share_along`); None when it does not.

    Examples
    --------
    >>> filled_divide_note(0.123)
    '12 % of the divide runs over holes of nodata filled by interpolation: the verdict reads interpolated ground there.'
    >>> filled_divide_note(0.0)
    """
    if not share:
        return None
    return (f"{100 * share:.2g} % of the divide runs over holes of nodata filled by interpolation: the verdict reads "
            "interpolated ground there.")
