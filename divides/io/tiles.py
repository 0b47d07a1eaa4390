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

__all__ = ["TileGrid", "ScratchTiles"]


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
