"""Reading a DEM from any single-band raster rasterio can open."""

from __future__ import annotations

import math
import os
import re
import warnings
from collections.abc import Sequence
from typing import Any

import numpy as np
import rasterio
import rasterio.errors
from affine import Affine
from rasterio.enums import MaskFlags
from rasterio.windows import Window

from divides.errors import (
    BandError,
    CrsError,
    DemReadError,
    DividesError,
    GridError,
    InputError,
    ParameterError,
)
from divides.io.dem import Dem
from divides.io.memory import MemoryNeed, check_fits, read_bytes_per_cell

__all__ = ["read_dem", "VERTICAL_UNITS", "INT16_VOID"]

#: Accepted vertical units and their size in metres. The international foot is
#: exactly 0.3048 m and the US survey foot exactly 1200/3937 m (NIST SP 811, B.8).
VERTICAL_UNITS: dict[str, float] = {"m": 1.0, "ft": 0.3048, "us-ft": 1200.0 / 3937.0}

#: The void value of 16-bit integer DEMs (SRTM and its descendants; common practice).
INT16_VOID = -32768

# A bound this close to a cell edge (in cells) is taken as on the edge, so that
# bounds copied from a grid do not grab an extra row through rounding noise.
_EDGE_TOLERANCE = 1e-6


def read_dem(
    path: str | os.PathLike,
    *,
    bounds: Sequence[float] | None = None,
    band: int | None = None,
    vertical_unit: str = "m",
    nodata: float | None = None,
    cell_size: float | tuple[float, float] | None = None,
    memory: MemoryNeed | None = None,
) -> Dem:
    """Read a DEM from a single-band raster (GeoTIFF or any format rasterio opens).

    Parameters
    ----------
    path : str or os.PathLike
        The raster file (GDAL virtual paths such as ``/vsizip/...`` work too).
    bounds : (left, bottom, right, top), optional
        Read only the cells overlapping this box, given in the DEM's CRS units
        (or in the local metric frame of an ungeoreferenced raster read with
        ``cell_size``). The box is clipped to the grid and widened to whole cells.
    band : int, optional
        1-based band to read. Required when the raster has several bands.
    vertical_unit : {"m", "ft", "us-ft"}
        Unit of the stored elevations; they are converted to metres.
    nodata : float, optional
        Value marking missing cells; overrides the file's nodata value.
        16-bit integer voids (-32768) are always missing.
    cell_size : float or (dx, dy), optional
        Cell size in metres. Required when the raster has no CRS or no
        geotransform; when given with a CRS it overrides the CRS cell size.
    memory : MemoryNeed, optional
        What the caller will do with the DEM; the read is refused before any
        cell is read when it and this need would not fit in free memory (the
        read alone is always checked).

    Returns
    -------
    Dem
        North-up elevations in metres, float32 unless the source needs float64.

    Raises
    ------
    DemReadError
        The file is missing or is not a readable raster.
    BandError
        Several bands and no ``band``, or ``band`` out of range.
    CrsError
        No CRS (or no geotransform) and no ``cell_size``.
    GridError
        Rotated or sheared grid, or fewer than 3 x 3 valid cells.
    ParameterError
        Bad ``bounds``, ``vertical_unit`` or ``nodata``, or bounds outside the DEM.
    GridError
        The DEM (or window) and ``memory`` would not fit in memory.

    Examples
    --------
    >>> dem = read_dem("demo/uplands.tif")  # doctest: +SKIP
    >>> dem.cell_size_m  # doctest: +SKIP
    (30.0, 30.0)
    """
    name = os.fspath(path)
    if isinstance(name, bytes):
        name = os.fsdecode(name)
    scale = _vertical_scale(vertical_unit)
    box = _check_bounds(bounds)
    if nodata is not None:
        nodata = _check_nodata(nodata)
    _check_exists(name)

    try:
        with warnings.catch_warnings():
            # An ungeoreferenced raster is handled below with a clear error.
            warnings.simplefilter("ignore", rasterio.errors.NotGeoreferencedWarning)
            src = rasterio.open(name)
    except rasterio.errors.RasterioError as exc:
        raise DemReadError(
            f"cannot open DEM '{name}': {_reason(exc, name)}; "
            "expected a raster file such as a GeoTIFF"
        ) from None

    with src:
        index = _choose_band(src, band, name)
        dtype = np.dtype(src.dtypes[index - 1])
        if dtype.kind not in "iuf":
            raise InputError(
                f"band {index} of DEM '{name}' holds {dtype.name} values; "
                "elevations must be integers or floating-point numbers"
            )
        # GDAL reports the identity transform when a file has no geotransform.
        georeferenced = src.transform != Affine.identity()
        if not georeferenced and src.gcps[0]:
            raise GridError(
                f"DEM '{name}' is georeferenced by ground control points, not a geotransform; "
                "warp it to a north-up grid first (e.g. gdalwarp)"
            )
        crs = src.crs if georeferenced else None
        if crs is None and cell_size is None:
            what = "no CRS" if georeferenced else "no georeference (no geotransform: pixel coordinates only)"
            raise CrsError(
                f"DEM '{name}' has {what}, so its cell size in metres is unknown; "
                "give the cell size in metres (cell_size= / --cell-size)"
            )
        height, width = src.height, src.width
        if georeferenced:
            grid = src.transform
        else:
            # A plain image: rows run downward, so build a north-up local frame.
            dx, dy = _pair(cell_size)
            grid = Affine(dx, 0.0, 0.0, 0.0, -dy, height * dy)
        if grid.b != 0 or grid.d != 0:
            raise GridError(
                f"DEM '{name}' has a rotated or sheared geotransform (b={grid.b}, d={grid.d}); "
                "only north-up or south-up grids are accepted: warp it first (e.g. gdalwarp)"
            )

        window = None if box is None else _window_for_bounds(box, grid, height, width, name)
        file_nodata = src.nodatavals[index - 1]
        flags = src.mask_flag_enums[index - 1]
        rows, cols = (height, width) if window is None else (int(window.height), int(window.width))
        wide = dtype in (np.float64, np.int32, np.uint32, np.int64, np.uint64)
        check_fits(name, rows, cols, read_bytes_per_cell(dtype.itemsize, wide=wide), memory)
        try:
            data = src.read(index, window=window)
            mask = None
            if (MaskFlags.per_dataset in flags or MaskFlags.alpha in flags) and MaskFlags.nodata not in flags:
                mask = src.read_masks(index, window=window) == 0
        except rasterio.errors.RasterioError as exc:
            raise DemReadError(f"cannot read band {index} of DEM '{name}': {_reason(exc, name)}") from None
        meta = {
            "driver": src.driver,
            "band": index,
            "band_count": src.count,
            "source_dtype": dtype.name,
            "source_shape": (height, width),
            "window": None
            if window is None
            else (int(window.row_off), int(window.col_off), int(window.height), int(window.width)),
            "georeferenced": georeferenced,
            "band_unit": src.units[index - 1] or None,
        }

    effective_nodata = file_nodata if nodata is None else nodata
    if dtype == np.int16 and effective_nodata is None:
        effective_nodata = float(INT16_VOID)
    extra_invalid = mask
    if dtype == np.int16 and effective_nodata != INT16_VOID:
        voids = data == INT16_VOID
        if voids.any():
            extra_invalid = voids if extra_invalid is None else extra_invalid | voids
    if extra_invalid is not None and extra_invalid.any():
        # Mark these cells NaN in the dtype Dem.from_array would pick anyway.
        data = data.astype(np.float64 if wide else np.float32, copy=False)
        data[extra_invalid] = np.nan

    # Composed here with `@`: rasterio.windows.transform still uses affine's deprecated `*`.
    sub_transform = grid if window is None else grid @ Affine.translation(window.col_off, window.row_off)
    try:
        dem = Dem.from_array(
            data,
            cell_size=cell_size,
            transform=sub_transform,
            crs=crs,
            nodata=effective_nodata,
            vertical_scale=scale,
            vertical_unit=vertical_unit,
            path=name,
            copy=False,  # the array was read for this DEM alone
        )
    except DividesError as exc:
        raise type(exc)(f"DEM '{name}': {exc}") from None
    except rasterio.errors.CRSError as exc:
        raise CrsError(f"DEM '{name}': its CRS cannot be used for metric cell sizes ({exc})") from None
    dem.meta.update(meta)
    return dem


# ---------------------------------------------------------------------- checks
def _vertical_scale(unit: Any) -> float:
    if not isinstance(unit, str) or unit not in VERTICAL_UNITS:
        raise ParameterError(
            f"vertical_unit {unit!r} is not accepted; use one of "
            + ", ".join(repr(u) for u in VERTICAL_UNITS)
            + " (metres, international feet, US survey feet)"
        )
    return VERTICAL_UNITS[unit]


def _check_bounds(bounds: Any) -> tuple[float, float, float, float] | None:
    if bounds is None:
        return None
    expected = "bounds must be 4 finite numbers (left, bottom, right, top) with left < right and bottom < top"
    try:
        values = tuple(float(v) for v in bounds)
    except (TypeError, ValueError):
        raise ParameterError(f"{expected}; got {bounds!r}") from None
    if len(values) != 4 or not all(math.isfinite(v) for v in values):
        raise ParameterError(f"{expected}; got {bounds!r}")
    left, bottom, right, top = values
    if not (left < right and bottom < top):
        raise ParameterError(f"{expected}; got {bounds!r}")
    return left, bottom, right, top


def _check_nodata(nodata: Any) -> float:
    if isinstance(nodata, bool):
        raise ParameterError(f"nodata must be a number; got {nodata!r}")
    try:
        return float(nodata)
    except (TypeError, ValueError):
        raise ParameterError(f"nodata must be a number; got {nodata!r}") from None


def _pair(cell_size: Any) -> tuple[float, float]:
    try:
        dxy = np.broadcast_to(np.asarray(cell_size, dtype=np.float64), (2,))
    except (TypeError, ValueError):
        raise GridError(f"cell_size must be one or two positive numbers of metres; got {cell_size!r}") from None
    if not np.all(np.isfinite(dxy)) or np.any(dxy <= 0):
        raise GridError(f"cell_size must be positive metres; got {cell_size!r}")
    return float(dxy[0]), float(dxy[1])


def _is_local(name: str) -> bool:
    return not (name.startswith("/vsi") or "://" in name)


def _check_exists(name: str) -> None:
    if not _is_local(name):
        return
    if not os.path.exists(name):
        raise DemReadError(f"cannot open DEM '{name}': no such file")
    if os.path.isdir(name):
        raise DemReadError(f"cannot open DEM '{name}': it is a directory, not a raster file")


def _reason(exc: BaseException, name: str) -> str:
    """The most specific GDAL message in an exception chain, without the path."""
    messages = []
    while exc is not None and len(messages) < 5:
        messages.append(str(exc))
        exc = exc.__cause__
    useful = [m for m in messages if m and "see previous exception" not in m.lower()]
    text = " ".join((useful[0] if useful else messages[0]).split())
    # GDAL often starts with the path, which the caller's message already names.
    for prefix in (f"'{name}'", name):
        if text.startswith(prefix):
            text = text[len(prefix) :].lstrip(" :,")
    text = re.sub(r"^band \d+: ", "", text)  # the caller names the band already
    text = text.rstrip(".") or "unknown error"
    return text if len(text) <= 200 else text[:197] + "..."


def _choose_band(src: Any, band: Any, name: str) -> int:
    count = src.count
    if band is None:
        if count == 1:
            return 1
        raise BandError(
            f"DEM '{name}' has {count} bands; choose the elevation band with band=N "
            f"(--band N), N from 1 to {count}"
        )
    if isinstance(band, bool) or not isinstance(band, (int, np.integer)):
        raise BandError(f"band must be an integer from 1 to {count} for DEM '{name}'; got {band!r}")
    if not 1 <= int(band) <= count:
        raise BandError(
            f"band {int(band)} does not exist in DEM '{name}', which has {count} band(s) numbered 1 to {count}"
        )
    return int(band)


def _window_for_bounds(
    box: tuple[float, float, float, float], grid: Affine, height: int, width: int, name: str
) -> Window:
    """The whole-cell window covering ``box``, clipped to the grid."""
    left, bottom, right, top = box
    inverse = ~grid
    corners = [inverse @ (x, y) for x in (left, right) for y in (bottom, top)]
    cols = [c for c, _ in corners]
    rows = [r for _, r in corners]
    r0 = max(0, math.floor(min(rows) + _EDGE_TOLERANCE))
    r1 = min(height, math.ceil(max(rows) - _EDGE_TOLERANCE))
    c0 = max(0, math.floor(min(cols) + _EDGE_TOLERANCE))
    c1 = min(width, math.ceil(max(cols) - _EDGE_TOLERANCE))
    if r1 <= r0 or c1 <= c0:
        a, e = grid.a, grid.e
        full = (
            min(grid.c, grid.c + width * a),
            min(grid.f, grid.f + height * e),
            max(grid.c, grid.c + width * a),
            max(grid.f, grid.f + height * e),
        )
        raise ParameterError(
            f"bounds {tuple(box)} do not overlap DEM '{name}', whose bounds are "
            f"({full[0]:.10g}, {full[1]:.10g}, {full[2]:.10g}, {full[3]:.10g}) "
            "(left, bottom, right, top in the DEM's CRS units)"
        )
    return Window(c0, r0, c1 - c0, r1 - r0)
