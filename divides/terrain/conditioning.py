"""Hydrological conditioning: outlets, depression filling, optional breaching.

The raw DEM is never modified; the conditioned surface is used for routing only.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np
from scipy import ndimage

from divides.errors import GridError, ParameterError
from divides.io.dem import Dem
from divides.terrain._fill_kernels import priority_flood_fill, raised_totals

__all__ = ["Conditioned", "CONDITIONING_METHODS", "EDGE_NAMES", "outlet_mask", "fill_depressions", "condition"]

CONDITIONING_METHODS = ("fill", "breach")

#: Grids at least this large are filled in strips on all numba threads.
PARALLEL_MIN_CELLS = 2**20


@dataclass(frozen=True, eq=False)
class Conditioned:
    """A surface on which every valid cell drains to an outlet.

    Attributes
    ----------
    surface : ndarray
        Conditioned elevations (m), same shape and dtype as the DEM; NaN where invalid.
    outlets : ndarray of bool
        Cells that drain off the grid.
    method : str
        ``"fill"`` or ``"breach"``.
    filled_cells : int
        Cells raised by filling.
    filled_area_m2, filled_volume_m3 : float
        Plan area and volume added by filling.
    carved_cells : int
        Cells lowered by breaching (0 for ``"fill"``).
    carved_volume_m3 : float
        Volume removed by breaching.
    closed_edges : tuple of str
        Grid edges that were not outlets.
    """

    surface: np.ndarray
    outlets: np.ndarray
    method: str = "fill"
    filled_cells: int = 0
    filled_area_m2: float = 0.0
    filled_volume_m3: float = 0.0
    carved_cells: int = 0
    carved_volume_m3: float = 0.0
    closed_edges: tuple = ()

    def summary(self) -> dict:
        """JSON-ready figures for reports."""
        return {
            "method": self.method,
            "filled_cells": self.filled_cells,
            "filled_area_m2": self.filled_area_m2,
            "filled_volume_m3": self.filled_volume_m3,
            "carved_cells": self.carved_cells,
            "carved_volume_m3": self.carved_volume_m3,
            "n_outlet_cells": int(np.count_nonzero(self.outlets)),
        }


EDGE_NAMES = ("north", "south", "east", "west")


def outlet_mask(dem: Dem, *, sea_level: float | None = None, closed_edges=()) -> np.ndarray:
    """Cells that drain off the grid.

    Parameters
    ----------
    dem : Dem
    sea_level : float, optional
        Cells at or below this elevation (m) are outlets too (coasts, lakes
        held at a known level).
    closed_edges : iterable of str
        Grid edges (``north``, ``south``, ``east``, ``west``) across which no
        water leaves, e.g. where the DEM was cut along a known divide or a
        model boundary was a wall. Their cells drain inward.

    Returns
    -------
    ndarray of bool
        Valid cells on an open DEM edge, next to (8-neighbour) an invalid cell,
        or at or below ``sea_level``.
    """
    closed = _check_closed(closed_edges)
    return outlet_cells(dem.valid, dem.elevation, {side: side not in closed for side in EDGE_NAMES}, sea_level)


def _check_closed(closed_edges) -> set:
    closed = set(closed_edges)
    unknown = closed - set(EDGE_NAMES)
    if unknown:
        raise ParameterError(f"closed edges must be among {', '.join(EDGE_NAMES)}; got {', '.join(sorted(unknown))}")
    if len(closed) == 4:
        raise ParameterError("all four edges are closed: water could leave nowhere; keep at least one edge open")
    return closed


def outlet_cells(valid: np.ndarray, elevation: np.ndarray, open_edges: dict, sea_level: float | None) -> np.ndarray:
    """:func:`outlet_mask` of a grid or of a window of one.

    ``open_edges`` maps each side (north, south, east, west) to True where that
    side of the array is an open DEM edge; a window's sides inside the DEM are
    False, and its one-cell halo supplies the neighbours for the nodata rule.
    """
    edge = np.zeros(valid.shape, dtype=bool)
    if open_edges.get("north"):
        edge[0, :] = True
    if open_edges.get("south"):
        edge[-1, :] = True
    if open_edges.get("west"):
        edge[:, 0] = True
    if open_edges.get("east"):
        edge[:, -1] = True
    if not valid.all():
        edge |= ndimage.binary_dilation(~valid, structure=np.ones((3, 3), dtype=bool))
    out = valid & edge
    if sea_level is not None:
        if not np.isfinite(sea_level):
            raise ParameterError(f"sea_level must be a finite elevation in metres; got {sea_level!r}")
        with np.errstate(invalid="ignore"):
            out |= valid & (elevation <= sea_level)
    return out


def fill_depressions(z: np.ndarray, valid: np.ndarray, outlets: np.ndarray) -> tuple[np.ndarray, int]:
    """Raise every depression to its spill level (Priority-Flood, Barnes et al. 2014).

    Parameters
    ----------
    z : ndarray, 2-D float32 or float64
        Elevations; not modified.
    valid, outlets : ndarray of bool, same shape
        Usable cells, and the cells that drain off the grid (flood seeds).

    Returns
    -------
    filled : ndarray
        The filled surface (new array, same dtype).
    n_raised : int
        Number of cells raised.

    Examples
    --------
    >>> import numpy as np
    >>> z = np.array([[5, 5, 5], [5, 1, 5], [5, 4, 5]], dtype=np.float32)
    >>> edge = np.ones((3, 3), bool); edge[1, 1] = False
    >>> fill_depressions(z, np.ones((3, 3), bool), edge)[0][1, 1]
    np.float32(4.0)
    """
    if z.ndim != 2 or z.shape != valid.shape or z.shape != outlets.shape:
        raise GridError(f"z, valid and outlets must be 2-D arrays of one shape; got {z.shape}, {valid.shape}, {outlets.shape}")
    rows, cols = z.shape
    if (rows + 2) * (cols + 2) >= 2**32:
        raise GridError(f"the DEM has {rows} x {cols} cells; at most about 4 billion are supported; use a bounds window")
    dtype = z.dtype if z.dtype in (np.float32, np.float64) else np.float64
    threads = numba.get_num_threads()
    if threads > 1 and dtype == np.float32 and rows * cols >= PARALLEL_MIN_CELLS:
        # Strips on threads (Barnes 2016): the same filled surface, exactly, for float32.
        from divides.terrain.tiled_fill import fill_depressions_tiled

        return fill_depressions_tiled(z, valid, outlets, tile_rows=-(-rows // (2 * threads)), threads=threads)
    filled = np.array(z, dtype=dtype, order="C", copy=True).ravel()
    n_raised = priority_flood_fill(
        filled, np.ascontiguousarray(valid).ravel(), np.ascontiguousarray(outlets).ravel(), rows, cols
    )
    return filled.reshape(rows, cols), int(n_raised)


def condition(
    dem: Dem,
    *,
    method: str = "fill",
    sea_level: float | None = None,
    breach_max_length_m: float | None = None,
    breach_max_depth_m: float | None = None,
    closed_edges=(),
) -> Conditioned:
    """Make every valid cell drain to an outlet.

    Parameters
    ----------
    dem : Dem
    method : {"fill", "breach"}
        ``"fill"`` raises depressions to their spill level (Priority-Flood,
        Barnes et al. 2014). ``"breach"`` first carves bounded paths out of pits
        (Lindsay 2016), which suits high-resolution DEMs where roads and
        embankments dam valleys, then fills what could not be breached.
    sea_level : float, optional
        Cells at or below it are outlets.
    breach_max_length_m, breach_max_depth_m : float, optional
        Limits of a breach path (``"breach"`` only); defaults are those of
        :func:`divides.terrain.breaching.breach_depressions`.
    closed_edges : iterable of str
        Grid edges that are not outlets (see :func:`outlet_mask`).

    Returns
    -------
    Conditioned
    """
    if method not in CONDITIONING_METHODS:
        raise ParameterError(f"conditioning method {method!r} is unknown; use one of {', '.join(CONDITIONING_METHODS)}")
    outlets = outlet_mask(dem, sea_level=sea_level, closed_edges=closed_edges)
    z = dem.elevation
    carved_cells, carved_volume = 0, 0.0
    if method == "breach":
        from divides.terrain.breaching import breach_depressions

        result = breach_depressions(
            z,
            dem.valid,
            outlets,
            dx=dem.dx,
            dy=dem.dy,
            cell_area=dem.cell_area,
            max_length_m=breach_max_length_m,
            max_depth_m=breach_max_depth_m,
        )
        z = result.surface
        carved_cells, carved_volume = int(result.carved_cells), float(result.carved_volume_m3)
    filled, n_raised = fill_depressions(z, dem.valid, outlets)
    rows, cols = dem.shape
    filled_area, filled_volume = raised_totals(filled.ravel(), z.ravel(), rows, cols, dem.cell_area)
    return Conditioned(
        surface=filled,
        outlets=outlets,
        method=method,
        filled_cells=n_raised,
        filled_area_m2=float(filled_area),
        filled_volume_m3=float(filled_volume),
        carved_cells=carved_cells,
        carved_volume_m3=carved_volume,
        closed_edges=tuple(closed_edges),
    )
