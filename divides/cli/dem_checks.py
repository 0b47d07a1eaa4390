"""Checks of the options against the DEM, made right after reading it and before any routing.

A mistake the DEM alone can reveal (too few valid cells, a side point outside
the DEM or on nodata) is reported before the first progress line, so the user
sees one error line and nothing else.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from divides.errors import DividesWarning, GridError, ParameterError, SideError

if TYPE_CHECKING:  # pragma: no cover - type hints only
    from divides.io.dem import Dem

__all__ = ["MIN_INTERIOR_CELLS", "check_closed_edges", "check_enough_cells", "check_options_against_dem",
           "check_side_points", "check_finite_points"]

#: Fewest valid cells with eight valid neighbours: a 5 × 5 block of data. Below it there is no room
#: for two basins and a divide between them (cells on the edge of the data are outlets).
MIN_INTERIOR_CELLS = 9


def check_enough_cells(dem: Dem) -> None:
    """Refuse a DEM with too few valid cells for two basins and a divide.

    Raises
    ------
    GridError
        Fewer than :data:`MIN_INTERIOR_CELLS` valid cells have eight valid neighbours.
    """
    import numpy as np

    valid = np.asarray(dem.valid, dtype=bool)
    rows, cols = valid.shape
    interior = 0
    if rows >= 3 and cols >= 3:
        core = valid[1:-1, 1:-1].copy()
        for dr in (-1, 0, 1):
            for dc in (-1, 0, 1):
                core &= valid[1 + dr: rows - 1 + dr, 1 + dc: cols - 1 + dc]
        interior = int(np.count_nonzero(core))
    if interior < MIN_INTERIOR_CELLS:
        n_valid = int(np.count_nonzero(valid))
        used_rows = int(np.count_nonzero(valid.any(axis=1)))
        used_cols = int(np.count_nonzero(valid.any(axis=0)))
        name = dem.path.replace("\\", "/").rsplit("/", 1)[-1] if dem.path else "the DEM"
        raise GridError(
            f"DEM '{name}' has too few valid cells for a divide: {n_valid} valid cell(s) in {used_rows} row(s) x "
            f"{used_cols} column(s), {interior} with all eight neighbours valid; at least a 5 x 5 block of data "
            "is needed: check the file, its nodata value, --band and --bounds"
        )


def check_options_against_dem(dem: Dem, *, sea_level: float | None = None, channel_area: float | None = None,
                              reference_area: float | None = None) -> None:
    """Refuse a flat DEM, and options the DEM makes impossible: a sea level at or above all land, a channel or
    reference area not smaller than the DEM or below one or two cells.

    Raises
    ------
    ParameterError
        The first mistake found, naming the option and what is accepted.
    """
    import numpy as np

    # reductions over the whole grid, without copying it (DEMs of 10^9 cells): elevations are NaN off the data
    low, high = float(np.nanmin(dem.elevation)), float(np.nanmax(dem.elevation))
    if high - low <= 0:
        raise ParameterError(f"DEM '{dem.path}' is flat (every valid cell at {low:g} m): with no relief there are no "
                             "channels and no divide; check the file, its nodata value and --vertical-unit")
    if sea_level is not None and sea_level >= high:
        raise ParameterError(f"--sea-level {sea_level:g} m is at or above the highest cell of the DEM ({high:g} m): "
                             "everything would be sea; give a level below the land")
    total = float(np.dot(dem.cell_area, np.count_nonzero(dem.valid, axis=1)))
    cell = float(np.median(dem.cell_area))
    for option, value in (("--channel-area", channel_area), ("--reference-area", reference_area)):
        if value is None:
            continue
        if value >= total:
            raise ParameterError(f"{option} {value:g} m² is not smaller than the whole DEM ({total:.4g} m²); "
                                 "give a drainage area well inside it (often 1e4 to 1e6 m²)")
        if option == "--channel-area" and value < 2 * cell:
            raise ParameterError(f"{option} {value:g} m² is smaller than two cells ({2 * cell:.4g} m²): every cell "
                                 "would be a channel; give at least that (often 1e4 to 1e6 m²)")
        if option == "--reference-area" and value < cell:
            raise ParameterError(f"{option} {value:g} m² is smaller than one cell ({cell:.4g} m²); give at least "
                                 "one cell, usually the channel area")


def check_closed_edges(dem: Dem, closed_edges: tuple[str, ...]) -> None:
    """Refuse a closed edge whose outermost row or column holds no data, and warn where it is partly nodata.

    A closure acts on the grid's outermost row or column; a valid cell beside nodata stays an outlet
    (docs/methods.md §1). Behind a nodata collar (as after reprojection) a closed edge would close nothing,
    silently: the message gives the ``--bounds`` of the data, which crop the collar.

    Raises
    ------
    ParameterError
        A closed edge's outermost line has no valid cell.
    """
    import warnings

    import numpy as np

    valid = dem.valid
    lines = {"north": valid[0, :], "south": valid[-1, :], "west": valid[:, 0], "east": valid[:, -1]}
    for edge in closed_edges:
        line = lines[edge]
        n_valid = int(np.count_nonzero(line))
        what = "row" if edge in ("north", "south") else "column"
        if n_valid == 0:
            box = ",".join(f"{v:.12g}" for v in _data_bounds(dem))
            raise ParameterError(f"--closed-edges {edge}: the DEM's outermost {edge} {what} holds no data (a nodata "
                                 "collar), so nothing would be closed (cells beside nodata drain off the DEM); crop "
                                 f"the collar with --bounds {box} (the extent of the data) or leave {edge} open")
        if n_valid < line.size:
            warnings.warn(f"--closed-edges {edge}: {line.size - n_valid} of the {line.size} cells of the DEM's "
                          f"outermost {edge} {what} are nodata; valid cells beside nodata drain off the DEM, so the "
                          f"closure holds on that {what}'s {n_valid} valid cells only", DividesWarning, stacklevel=2)


def _data_bounds(dem: Dem) -> tuple[float, float, float, float]:
    """``(left, bottom, right, top)`` of the rows and columns that hold valid cells."""
    import numpy as np

    rows = np.flatnonzero(dem.valid.any(axis=1))
    cols = np.flatnonzero(dem.valid.any(axis=0))
    t = dem.transform
    xs = (t.c + cols[0] * t.a, t.c + (cols[-1] + 1) * t.a)
    ys = (t.f + rows[0] * t.e, t.f + (rows[-1] + 1) * t.e)
    return min(xs), min(ys), max(xs), max(ys)


def check_finite_points(spec_points: tuple[tuple[float, float], ...], *, option: str, text: str) -> None:
    """Refuse coordinates that are not finite (``1e309`` reads as infinity).

    Raises
    ------
    SideError
    """
    for x, y in spec_points:
        if not (math.isfinite(x) and math.isfinite(y)):
            raise SideError(f"{option} {text!r} has a coordinate too large to be a number (read as {x:g},{y:g}); "
                            "give coordinates in the DEM's CRS (or longitude,latitude with --lonlat)")


def check_side_points(dem: Dem, spec_points: tuple[tuple[float, float], ...], *, option: str, text: str,
                      lonlat: bool) -> None:
    """Refuse side points outside the DEM or on nodata cells, before routing.

    Points that cannot be placed here (e.g. longitude,latitude on a DEM
    without a CRS) are left to the assessment, which says why.

    Raises
    ------
    SideError
    """
    import numpy as np

    if not spec_points:
        return
    xs = np.array([p[0] for p in spec_points], dtype=np.float64)
    ys = np.array([p[1] for p in spec_points], dtype=np.float64)
    try:
        if lonlat:
            xs, ys = dem.from_lonlat(xs, ys)
        t = dem.transform
        with np.errstate(all="ignore"):  # in floats: a huge coordinate must not overflow an integer cast
            cols = np.floor((np.asarray(xs, dtype=np.float64) - t.c) / t.a)
            rows = np.floor((np.asarray(ys, dtype=np.float64) - t.f) / t.e)
    except Exception:  # noqa: BLE001 - the assessment gives the precise reason
        return
    n_rows, n_cols = dem.shape
    left, bottom, right, top = dem.bounds
    for (x, y), r, c in zip(spec_points, rows, cols):
        label = f"{x:g},{y:g}" + (" (lon,lat)" if lonlat else "")
        if not (np.isfinite(r) and np.isfinite(c) and 0 <= r < n_rows and 0 <= c < n_cols):
            raise SideError(f"{option} {text!r}: point {label} is outside the DEM (x {left:g} to {right:g}, "
                            f"y {bottom:g} to {top:g} in the DEM's CRS"
                            + ("" if lonlat else "; use --lonlat for longitude,latitude") + ")")
        if not dem.valid[int(r), int(c)]:
            raise SideError(f"{option} {text!r}: point {label} falls on a nodata cell of the DEM; "
                            "give a point on land with data (snapping starts from a valid cell)")
