"""Tiles of a large grid: their windows, and a scratch folder holding intermediate tiles.

A :class:`TileGrid` cuts a ``rows x cols`` grid into blocks of at most
``tile_rows x tile_cols`` cells; tiles are addressed ``(ti, tj)`` (tile row,
tile column). :class:`ScratchTiles` keeps per-tile arrays as ``.npy`` files in
a folder the user chooses (or in memory when no folder is given), so that
tasks on several processes or machines sharing the folder can pass tiles by
name instead of by value.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from divides.errors import OutputError, ParameterError

__all__ = ["TileGrid", "ScratchTiles", "RasterTiles", "write_tiles_geotiff"]


@dataclass(frozen=True)
class TileGrid:
    """A ``rows x cols`` grid cut into tiles of at most ``tile_rows x tile_cols`` cells.

    Examples
    --------
    >>> g = TileGrid(10, 7, 4, 4)
    >>> g.shape_in_tiles, g.window(2, 1)
    ((3, 2), (8, 10, 4, 7))
    """

    rows: int
    cols: int
    tile_rows: int
    tile_cols: int

    def __post_init__(self) -> None:
        if self.tile_rows < 2 or self.tile_cols < 2:
            raise ParameterError(f"tiles must be at least 2 x 2 cells; got {self.tile_rows} x {self.tile_cols}")

    @property
    def shape_in_tiles(self) -> tuple[int, int]:
        """``(tile rows, tile columns)``."""
        return -(-self.rows // self.tile_rows), -(-self.cols // self.tile_cols)

    def window(self, ti: int, tj: int) -> tuple[int, int, int, int]:
        """``(row0, row1, col0, col1)`` of tile ``(ti, tj)``, ends exclusive."""
        r0, c0 = ti * self.tile_rows, tj * self.tile_cols
        return r0, min(r0 + self.tile_rows, self.rows), c0, min(c0 + self.tile_cols, self.cols)

    def halo_window(self, ti: int, tj: int, halo: int) -> tuple[int, int, int, int]:
        """The tile's window widened by ``halo`` cells on each side, clipped to the grid."""
        r0, r1, c0, c1 = self.window(ti, tj)
        return max(0, r0 - halo), min(self.rows, r1 + halo), max(0, c0 - halo), min(self.cols, c1 + halo)

    def tiles(self) -> Iterator[tuple[int, int]]:
        """Every tile, row by row."""
        nt, mt = self.shape_in_tiles
        for ti in range(nt):
            for tj in range(mt):
                yield ti, tj


class ScratchTiles:
    """Per-tile arrays kept in a scratch folder (``.npy``) or, without a folder, in memory.

    Parameters
    ----------
    folder : path, optional
        Where tiles go. A fresh sub-folder is made inside it and removed by
        :meth:`close`; the folder must be reachable by every worker.
    """

    def __init__(self, folder: str | os.PathLike | None = None) -> None:
        self._memory: dict[str, np.ndarray] | None = None
        if folder is None:
            self._memory = {}
            self.path = None
            return
        base = Path(folder)
        try:
            base.mkdir(parents=True, exist_ok=True)
            self.path = Path(tempfile.mkdtemp(prefix="divides-tiles-", dir=base))
        except OSError as exc:
            raise OutputError(f"scratch folder '{base}' cannot be used: {exc.strerror or exc}") from None

    def __getstate__(self) -> dict:
        if self._memory is not None:
            raise ParameterError("tiles kept in memory cannot be shared between processes; give a scratch folder")
        return self.__dict__

    def _file(self, name: str, tile: tuple[int, int]) -> Path:
        return self.path / f"{name}-{tile[0]}-{tile[1]}.npy"

    def put(self, name: str, tile: tuple[int, int], array: np.ndarray) -> None:
        """Keep ``array`` as ``name`` of ``tile`` (replacing any earlier one)."""
        if self._memory is not None:
            self._memory[f"{name}-{tile[0]}-{tile[1]}"] = array
            return
        target = self._file(name, tile)
        partial = target.with_suffix(".part.npy")
        try:
            np.save(partial, array, allow_pickle=False)
            os.replace(partial, target)
        except OSError as exc:
            raise OutputError(f"cannot write a tile to scratch folder '{self.path}': {exc.strerror or exc}") from None

    def get(self, name: str, tile: tuple[int, int]) -> np.ndarray:
        """The array ``name`` of ``tile``."""
        if self._memory is not None:
            return self._memory[f"{name}-{tile[0]}-{tile[1]}"]
        return np.load(self._file(name, tile), allow_pickle=False)

    def close(self) -> None:
        """Drop every tile (and the scratch sub-folder)."""
        if self._memory is not None:
            self._memory.clear()
        elif self.path is not None and self.path.exists():
            shutil.rmtree(self.path, ignore_errors=True)


class RasterTiles:
    """A single-band raster read window by window (rasterio), with the validity rules of :func:`read_dem`.

    Picklable (it keeps the path, not an open file), so Dask workers can read
    their own tiles. Attributes ``shape``, ``dx``, ``dy``, ``cell_area`` (per
    row, metres), ``transform`` and ``crs`` describe the whole grid.

    Parameters
    ----------
    path : str or path
    band : int
    vertical_unit : {"m", "ft", "us-ft"}
    nodata : float, optional
        Overrides the file's nodata value.
    """

    def __init__(self, path, *, band: int = 1, vertical_unit: str = "m", nodata: float | None = None) -> None:
        import rasterio
        import rasterio.errors

        from divides.errors import DemReadError, GridError
        from divides.io.dem import Dem
        from divides.io.reading import INT16_VOID, VERTICAL_UNITS

        self.path = os.fspath(path)
        self.band = band
        if vertical_unit not in VERTICAL_UNITS:
            raise ParameterError(f"vertical_unit {vertical_unit!r} is not accepted; use one of "
                                 + ", ".join(VERTICAL_UNITS))
        self.scale = VERTICAL_UNITS[vertical_unit]
        try:
            with rasterio.open(self.path) as src:
                self.shape = (src.height, src.width)
                self.transform, self.crs = src.transform, src.crs
                dtype = np.dtype(src.dtypes[band - 1])
                file_nodata = src.nodatavals[band - 1]
        except rasterio.errors.RasterioError as exc:
            raise DemReadError(f"cannot open DEM '{self.path}' for tiles: {exc}") from None
        if self.transform.b != 0 or self.transform.d != 0 or self.transform.e > 0 or self.transform.a < 0:
            raise GridError(f"DEM '{self.path}': the tiled path needs a north-up grid; warp it first (e.g. gdalwarp)")
        if self.crs is None:
            raise GridError(f"DEM '{self.path}' has no CRS: the tiled path needs metric cell sizes from a CRS")
        self.nodata = file_nodata if nodata is None else nodata
        # 16-bit voids are missing whatever the nodata value (as in read_dem)
        self.void = INT16_VOID if dtype == np.int16 else None
        # per-row cell sizes from a three-column stand-in with the DEM's georeference
        probe = Dem.from_array(np.zeros((self.shape[0], 3), dtype=np.float32), transform=self.transform, crs=self.crs)
        self.dx, self.dy, self.cell_area = probe.dx, probe.dy, probe.cell_area

    def read(self, r0: int, r1: int, c0: int, c1: int) -> tuple[np.ndarray, np.ndarray]:
        """Elevations in metres (float32, NaN where invalid) and the valid mask of a window."""
        import rasterio
        from rasterio.windows import Window

        from divides.io.dem import VALID_RANGE_M

        with rasterio.open(self.path) as src:
            data = src.read(self.band, window=Window(c0, r0, c1 - c0, r1 - r0))
        z = data.astype(np.float32)
        valid = np.isfinite(z)
        if self.nodata is not None and np.isfinite(self.nodata):
            valid &= data != np.asarray(self.nodata).astype(data.dtype)
        if self.void is not None:
            valid &= data != self.void
        if self.scale != 1.0:
            z *= np.float32(self.scale)
        with np.errstate(invalid="ignore"):
            valid &= (z >= VALID_RANGE_M[0]) & (z <= VALID_RANGE_M[1])
        z[~valid] = np.nan
        return z, valid


def write_tiles_geotiff(path, grid: TileGrid, read_tile, *, dtype: str, transform, crs, nodata=None,
                        block: int = 256) -> None:
    """Write a tiled GeoTIFF (deflate) one tile at a time through rasterio windows.

    ``read_tile((ti, tj))`` returns the tile's array. The file is written under
    a temporary name and renamed into place.
    """
    import rasterio
    import rasterio.errors
    from rasterio.windows import Window

    target = Path(path)
    partial = target.with_name(f".{target.name}.part")
    blockx = min(block, max(16, (grid.cols // 16) * 16)) if grid.cols >= 16 else None
    blocky = min(block, max(16, (grid.rows // 16) * 16)) if grid.rows >= 16 else None
    profile = dict(driver="GTiff", width=grid.cols, height=grid.rows, count=1, dtype=dtype, crs=crs,
                   transform=transform, nodata=nodata, compress="deflate", bigtiff="IF_SAFER")
    if blockx and blocky:
        profile.update(tiled=True, blockxsize=blockx, blockysize=blocky)
    try:
        with rasterio.open(partial, "w", **profile) as dst:
            for t in grid.tiles():
                r0, r1, c0, c1 = grid.window(*t)
                dst.write(np.asarray(read_tile(t)).astype(dtype, copy=False), 1,
                          window=Window(c0, r0, c1 - c0, r1 - r0))
        os.replace(partial, target)
    except (OSError, rasterio.errors.RasterioError) as exc:
        partial.unlink(missing_ok=True)
        raise OutputError(f"cannot write '{target}': {exc}") from None
