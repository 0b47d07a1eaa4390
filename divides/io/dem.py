"""The in-memory DEM: elevations, valid mask and georeference with metric cell sizes."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from affine import Affine
from rasterio.crs import CRS

from divides.errors import CrsError, GridError, InputError
from divides.io.geodesy import Ellipsoid, ellipsoid_from_wkt, row_cell_sizes

__all__ = ["Dem", "VALID_RANGE_M", "MIN_VALID_SHAPE"]

#: Elevations outside this range (metres) are voids, not terrain: the deepest
#: ocean trench is about -11 km and the highest summit under 9 km (common practice).
VALID_RANGE_M: tuple[float, float] = (-12000.0, 9000.0)

#: A DEM needs at least a 3 x 3 block of valid cells to route anything.
MIN_VALID_SHAPE = 3


def _as_crs(crs: Any) -> CRS | None:
    if crs is None or isinstance(crs, CRS):
        return crs
    try:
        return CRS.from_user_input(crs)
    except Exception as exc:  # rasterio raises its own CRSError
        raise CrsError(
            f"crs {crs!r} is not a coordinate reference system rasterio understands; "
            "give an EPSG code ('EPSG:32633'), a WKT or a PROJ string"
        ) from exc


def _check_axis_aligned(transform: Affine) -> None:
    if transform.b != 0 or transform.d != 0:
        raise GridError(
            f"the DEM's geotransform is rotated or sheared (b={transform.b}, d={transform.d}); "
            "only north-up or south-up grids are accepted: warp it first (e.g. gdalwarp)"
        )
    if transform.a == 0 or transform.e == 0:
        raise GridError(f"the DEM's geotransform has a zero cell size: {tuple(transform)[:6]}")


@dataclass(frozen=True, eq=False)
class Dem:
    """A single-band elevation grid with its georeference.

    Build one with :func:`divides.read_dem` or :meth:`Dem.from_array`; do not
    call the constructor directly. Arrays are row-major ``(rows, cols)`` and
    north-up (row 0 is the northern edge; south-up inputs are flipped on entry).

    Attributes
    ----------
    elevation : ndarray
        Elevations in metres (float32 or float64); NaN where invalid.
    valid : ndarray of bool
        True where the elevation is usable.
    transform : affine.Affine
        Pixel-to-world transform of the north-up grid.
    crs : rasterio.crs.CRS or None
        Coordinate reference system (None for a local metric grid).
    dx, dy, cell_area : ndarray
        Per-row cell width, height (m) and area (m²), shape ``(rows,)``.
    geographic : bool
        True when the CRS is in degrees.
    path : str or None
        File the DEM was read from.
    nodata : float or None
        The nodata value of the source, if any.
    vertical_unit : str
        Unit of the source elevations before conversion to metres.
    ellipsoid : Ellipsoid or None
        Ellipsoid used for the cell sizes of a geographic grid.
    """

    elevation: np.ndarray
    valid: np.ndarray
    transform: Affine
    crs: CRS | None
    dx: np.ndarray
    dy: np.ndarray
    cell_area: np.ndarray
    geographic: bool = False
    path: str | None = None
    nodata: float | None = None
    vertical_unit: str = "m"
    ellipsoid: Ellipsoid | None = None
    meta: dict = field(default_factory=dict)

    # ------------------------------------------------------------------ building
    @classmethod
    def from_array(
        cls,
        z: np.ndarray,
        *,
        cell_size: float | tuple[float, float] | None = None,
        transform: Affine | tuple | None = None,
        crs: Any = None,
        nodata: float | None = None,
        vertical_scale: float = 1.0,
        vertical_unit: str = "m",
        valid_range: tuple[float, float] | None = VALID_RANGE_M,
        path: str | None = None,
        copy: bool = True,
    ) -> Dem:
        """Wrap an in-memory elevation array.

        Parameters
        ----------
        z : array_like, shape (rows, cols)
            Elevations. NaN, ``nodata`` and values outside ``valid_range``
            (after scaling to metres) are marked invalid.
        cell_size : float or (dx, dy), optional
            Cell size in metres. Required when ``crs`` is None. With no
            ``transform`` the grid's upper-left corner is put at
            ``(0, rows * dy)`` so that y grows northward.
        transform : affine.Affine or 6-tuple, optional
            Pixel-to-world transform (GDAL order is not accepted; use
            ``Affine.from_gdal`` first). South-up grids are flipped to north-up.
        crs : CRS, str or int, optional
            Coordinate reference system of ``transform``.
        nodata : float, optional
            Value marking missing cells.
        vertical_scale : float
            Factor converting the elevations to metres (0.3048 for feet).
        vertical_unit : str
            Name of the source vertical unit, for reports.
        valid_range : (float, float) or None
            Plausible elevation range in metres; None disables the check.
        path : str, optional
            Where the data came from, for reports.
        copy : bool
            False lets the DEM take over ``z`` (modified in place) when it is
            already float32/float64, saving one copy of a large grid.

        Returns
        -------
        Dem

        Examples
        --------
        >>> import numpy as np
        >>> dem = Dem.from_array(np.arange(16.0).reshape(4, 4), cell_size=30.0)
        >>> dem.shape, float(dem.dx[0]), float(dem.cell_area[0])
        ((4, 4), 30.0, 900.0)
        """
        arr = np.asarray(z)
        if arr.ndim != 2:
            raise GridError(f"elevation must be a 2-D array (rows, cols); got {arr.ndim} dimension(s)")
        if not (np.issubdtype(arr.dtype, np.number) and not np.issubdtype(arr.dtype, np.complexfloating)):
            raise InputError(f"elevation must be numeric; got dtype {arr.dtype}")
        dtype = np.float64 if arr.dtype in (np.float64, np.int64, np.uint64, np.int32, np.uint32) else np.float32
        crs_obj = _as_crs(crs)
        rows, cols = arr.shape

        if cell_size is not None:
            dxy = np.broadcast_to(np.asarray(cell_size, dtype=np.float64), (2,))
            if not np.all(np.isfinite(dxy)) or np.any(dxy <= 0):
                raise GridError(f"cell_size must be positive metres; got {cell_size!r}")
        if transform is None:
            if cell_size is None:
                raise CrsError("an in-memory DEM needs a cell size in metres or a transform with a CRS")
            transform = Affine(float(dxy[0]), 0.0, 0.0, 0.0, -float(dxy[1]), rows * float(dxy[1]))
        elif not isinstance(transform, Affine):
            try:
                transform = Affine(*tuple(transform)[:6])
            except TypeError as exc:
                raise GridError(f"transform must be an affine.Affine or 6 numbers; got {transform!r}") from exc
        _check_axis_aligned(transform)
        if crs_obj is None and cell_size is None:
            raise CrsError(
                "the DEM has no CRS, so its cell size in metres is unknown; "
                "give a CRS, or a cell size in metres (--cell-size / cell_size=)"
            )

        elevation = np.array(arr, dtype=dtype, copy=copy or arr.dtype != dtype)
        # Flip south-up / east-to-west grids so every array is north-up, west-to-east.
        if transform.e > 0:
            elevation = elevation[::-1]
            transform = transform @ Affine.translation(0, rows) @ Affine.scale(1, -1)
        if transform.a < 0:
            elevation = elevation[:, ::-1]
            transform = transform @ Affine.translation(cols, 0) @ Affine.scale(-1, 1)
        elevation = np.ascontiguousarray(elevation)

        valid = np.isfinite(elevation)
        if nodata is not None and np.isfinite(nodata):
            valid &= elevation != np.asarray(nodata, dtype=dtype)
        if vertical_scale != 1.0:
            elevation *= dtype(vertical_scale)
        if valid_range is not None:
            with np.errstate(invalid="ignore"):
                valid &= (elevation >= valid_range[0]) & (elevation <= valid_range[1])
        elevation[~valid] = np.nan

        geographic = bool(crs_obj is not None and crs_obj.is_geographic)
        ellipsoid = None
        if cell_size is not None:
            dx = np.full(rows, float(dxy[0]))
            dy = np.full(rows, float(dxy[1]))
            area = dx * dy
        elif geographic:
            ellipsoid = ellipsoid_from_wkt(crs_obj.to_wkt())
            top = transform.f + transform.e * np.arange(rows)
            lat_top, lat_bottom = top, top + transform.e
            if np.nanmax(np.abs(np.r_[lat_top, lat_bottom])) > 90.0 + 1e-9:
                raise CrsError(
                    f"the DEM's CRS is geographic but its rows reach latitude "
                    f"{np.max(np.abs(np.r_[lat_top, lat_bottom])):.3f}; the CRS or transform is wrong"
                )
            dx, dy, area = row_cell_sizes(np.clip(lat_top, -90, 90), np.clip(lat_bottom, -90, 90), transform.a, ellipsoid)
        else:
            unit_name, factor = crs_obj.linear_units_factor
            if not factor or not np.isfinite(factor):
                raise CrsError(f"the DEM's CRS has linear unit {unit_name!r} with no known size in metres")
            dx = np.full(rows, abs(transform.a) * factor)
            dy = np.full(rows, abs(transform.e) * factor)
            area = dx * dy

        dem = cls(
            elevation=elevation,
            valid=valid,
            transform=transform,
            crs=crs_obj,
            dx=dx,
            dy=dy,
            cell_area=area,
            geographic=geographic,
            path=path,
            nodata=nodata,
            vertical_unit=vertical_unit,
            ellipsoid=ellipsoid,
        )
        dem._check_size()
        return dem

    def _check_size(self) -> None:
        rows, cols = self.shape
        if rows < MIN_VALID_SHAPE or cols < MIN_VALID_SHAPE:
            raise GridError(f"the DEM is {rows} x {cols} cells; at least 3 x 3 valid cells are needed")
        n = int(self.valid.sum())
        if n < MIN_VALID_SHAPE * MIN_VALID_SHAPE:
            raise GridError(
                f"the DEM has {n} valid cell(s); at least 9 (a 3 x 3 block) are needed "
                "(check the nodata value and the elevation unit)"
            )

    # ---------------------------------------------------------------- properties
    @property
    def shape(self) -> tuple[int, int]:
        """``(rows, cols)``."""
        return self.elevation.shape  # type: ignore[return-value]

    @property
    def size(self) -> int:
        """Number of cells."""
        return int(self.elevation.size)

    @property
    def n_valid(self) -> int:
        """Number of valid cells."""
        return int(np.count_nonzero(self.valid))

    @property
    def valid_area_m2(self) -> float:
        """Area (m²) of the valid cells, summed per row (no grid of cell areas)."""
        return float(np.count_nonzero(self.valid, axis=1) @ self.cell_area)

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """``(left, bottom, right, top)`` in CRS units."""
        rows, cols = self.shape
        left, top = self.transform.c, self.transform.f
        return (left, top + rows * self.transform.e, left + cols * self.transform.a, top)

    @property
    def cell_size_m(self) -> tuple[float, float]:
        """Median cell width and height in metres (for reports)."""
        return float(np.median(self.dx)), float(np.median(self.dy))

    def cell_area_grid(self) -> np.ndarray:
        """Cell area (m²) broadcast to the grid shape, zero on invalid cells."""
        return np.where(self.valid, self.cell_area[:, None], 0.0)

    # ---------------------------------------------------------------- coordinates
    def xy(self, rows: Any, cols: Any) -> tuple[np.ndarray, np.ndarray]:
        """World coordinates (CRS units) of cell centres."""
        r = np.asarray(rows, dtype=np.float64) + 0.5
        c = np.asarray(cols, dtype=np.float64) + 0.5
        t = self.transform
        return t.c + t.a * c, t.f + t.e * r

    def rowcol(self, x: Any, y: Any) -> tuple[np.ndarray, np.ndarray]:
        """Row and column (integers, possibly outside the grid) containing world points."""
        t = self.transform
        col = np.floor((np.asarray(x, dtype=np.float64) - t.c) / t.a).astype(np.int64)
        row = np.floor((np.asarray(y, dtype=np.float64) - t.f) / t.e).astype(np.int64)
        return row, col

    def to_lonlat(self, x: Any, y: Any) -> tuple[np.ndarray, np.ndarray]:
        """Longitude and latitude (WGS 84) of world points in the DEM's CRS."""
        x = np.atleast_1d(np.asarray(x, dtype=np.float64))
        y = np.atleast_1d(np.asarray(y, dtype=np.float64))
        if self.crs is None:
            raise CrsError("the DEM has no CRS, so longitude/latitude cannot be computed")
        from rasterio.warp import transform as warp_transform

        lon, lat = warp_transform(self.crs, CRS.from_epsg(4326), x.ravel(), y.ravel())
        return np.reshape(lon, x.shape), np.reshape(lat, y.shape)

    def from_lonlat(self, lon: Any, lat: Any) -> tuple[np.ndarray, np.ndarray]:
        """World coordinates in the DEM's CRS of longitude/latitude (WGS 84) points."""
        lon = np.atleast_1d(np.asarray(lon, dtype=np.float64))
        lat = np.atleast_1d(np.asarray(lat, dtype=np.float64))
        if self.crs is None:
            raise CrsError("the DEM has no CRS, so longitude/latitude points cannot be placed on it")
        from rasterio.warp import transform as warp_transform

        x, y = warp_transform(CRS.from_epsg(4326), self.crs, lon.ravel(), lat.ravel())
        return np.reshape(x, lon.shape), np.reshape(y, lat.shape)

    def describe(self) -> dict:
        """A JSON-ready description (used by reports and ``divides inspect``)."""
        z = self.elevation[self.valid]
        return {
            "path": self.path,
            "crs": None if self.crs is None else self.crs.to_string(),
            "shape": list(self.shape),
            "cell_size_m": list(self.cell_size_m),
            "geographic": self.geographic,
            "valid_share": self.n_valid / self.size,
            "elevation_m": [float(z.min()), float(z.max())],
            "bounds": list(self.bounds),
        }
