"""Depression filling tile by tile (Barnes 2016, parallel Priority-Flood with a tile-edge graph).

Three stages, each a function of one tile or of small summaries, so that any
scheduler can run them (threads here, Dask tasks in :mod:`divides.terrain.tiled`):

1. :func:`flood_tile_summary` floods a tile from its perimeter and outlets,
   labels the watersheds and returns the tile's label touches and its
   perimeter strips (a few numbers per perimeter cell);
2. :func:`spill_levels` joins the touches of all tiles and those across the
   seams into one graph of labels and solves it once;
3. :func:`raise_tile` lifts each cell to its label's spill level.

The result equals whole-grid Priority-Flood (Barnes et al. 2014) exactly for
float32 elevations: both give every cell the lowest level at which its water
can leave the DEM, a quantity that does not depend on the order of work.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from divides.errors import GridError
from divides.io.tiles import TileGrid
from divides.terrain import _tiled_kernels as _tk

__all__ = ["TileFlood", "flood_tile_summary", "spill_levels", "raise_tile", "fill_depressions_tiled"]


@dataclass(frozen=True)
class TileFlood:
    """What stage 2 needs to know of one flooded tile.

    Attributes
    ----------
    n_labels : int
        Watershed labels started at the tile's perimeter (local labels 2 ... n_labels + 1).
    edge_a, edge_b, edge_z : ndarray
        Touching local labels (a < b) and the lowest level of their touch.
    top, bottom, left, right : tuple of (labels, levels)
        The perimeter strips: local labels and tile-local fill, north row,
        south row, west column, east column.
    """

    n_labels: int
    edge_a: np.ndarray
    edge_b: np.ndarray
    edge_z: np.ndarray
    top: tuple[np.ndarray, np.ndarray]
    bottom: tuple[np.ndarray, np.ndarray]
    left: tuple[np.ndarray, np.ndarray]
    right: tuple[np.ndarray, np.ndarray]


def _lowest_edges(ea: np.ndarray, eb: np.ndarray, ez: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Keep one edge per label pair, the lowest."""
    if ea.size == 0:
        return ea, eb, ez
    key = (ea.astype(np.int64) << 32) | eb.astype(np.int64)
    order = np.lexsort((ez, key))
    key = key[order]
    first = np.ones(key.size, dtype=bool)
    first[1:] = key[1:] != key[:-1]
    keep = order[first]
    return ea[keep], eb[keep], ez[keep]


def flood_tile_summary(z: np.ndarray, valid: np.ndarray, outlets: np.ndarray, *, filled: np.ndarray | None = None,
                       labels: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, TileFlood]:
    """Stage 1: flood one tile on its own.

    Parameters
    ----------
    z : ndarray, 2-D float32 or float64
        The tile's elevations (not modified unless ``filled`` is ``z``).
    valid, outlets : ndarray of bool, same shape
        Usable cells and cells draining off the DEM (found with a one-cell halo).
    filled, labels : ndarray, optional
        C-contiguous outputs (z's dtype, int32) to write into, e.g. a strip of a whole grid.

    Returns
    -------
    filled : ndarray
        Tile-local fill.
    labels : ndarray of int32
        Local watershed labels (1 = drains to an outlet in the tile; 0 = invalid).
    TileFlood
    """
    rows, cols = z.shape
    if filled is None:
        filled = np.array(z, order="C", copy=True)
    elif filled is not z:
        filled[...] = z
    if labels is None:
        labels = np.empty((rows, cols), dtype=np.int32)
    n, ea, eb, ez = _tk.flood_tile(filled.ravel(), np.ascontiguousarray(valid).ravel(),
                                   np.ascontiguousarray(outlets).ravel(), rows, cols, labels.ravel())
    ea, eb, ez = _lowest_edges(ea, eb, ez)
    strip = lambda sl: (labels[sl].copy(), filled[sl].copy())  # noqa: E731
    summary = TileFlood(int(n), ea, eb, ez, strip(np.s_[0, :]), strip(np.s_[-1, :]), strip(np.s_[:, 0]),
                        strip(np.s_[:, -1]))
    return filled, labels, summary


def _to_global(labels: np.ndarray, base: int) -> np.ndarray:
    out = labels.astype(np.int64)
    shift = out >= _tk.FIRST_LABEL
    out[shift] += base - _tk.FIRST_LABEL
    return out


def spill_levels(floods: dict[tuple[int, int], TileFlood], grid: TileGrid) -> dict[tuple[int, int], np.ndarray]:
    """Stage 2: solve the graph of labels once for the whole DEM.

    Parameters
    ----------
    floods : dict
        :class:`TileFlood` of every tile of ``grid``.
    grid : TileGrid

    Returns
    -------
    dict
        Per tile, the spill level of each local label (index = label; -inf
        for invalid cells and cells already draining to an outlet).
    """
    bases, total = {}, _tk.FIRST_LABEL
    for t in grid.tiles():
        bases[t] = total
        total += floods[t].n_labels
    if total >= 2**31:
        raise GridError(f"{total} watershed labels on tile perimeters; use larger tiles")
    parts_a, parts_b, parts_z = [], [], []
    for t in grid.tiles():
        f = floods[t]
        parts_a.append(_to_global(f.edge_a, bases[t]))
        parts_b.append(_to_global(f.edge_b, bases[t]))
        parts_z.append(f.edge_z.astype(np.float64))
    nt, mt = grid.shape_in_tiles
    # seams between tile rows: the south row of one tile row against the north row of the next
    for ti in range(nt - 1):
        above = [(floods[ti, tj].bottom, bases[ti, tj]) for tj in range(mt)]
        below = [(floods[ti + 1, tj].top, bases[ti + 1, tj]) for tj in range(mt)]
        _seam(above, below, parts_a, parts_b, parts_z)
    for tj in range(mt - 1):
        west = [(floods[ti, tj].right, bases[ti, tj]) for ti in range(nt)]
        east = [(floods[ti, tj + 1].left, bases[ti, tj + 1]) for ti in range(nt)]
        _seam(west, east, parts_a, parts_b, parts_z)
    ea = np.concatenate(parts_a).astype(np.int32)
    eb = np.concatenate(parts_b).astype(np.int32)
    ez = np.concatenate(parts_z)
    spill = _tk.solve_spill(total, ea, eb, ez)
    spill[~np.isfinite(spill)] = -np.inf  # unreached labels keep their local fill
    out = {}
    for t in grid.tiles():
        local = np.full(floods[t].n_labels + _tk.FIRST_LABEL, -np.inf)
        local[_tk.FIRST_LABEL:] = spill[bases[t]: bases[t] + floods[t].n_labels]
        out[t] = local
    return out


def _seam(side_a, side_b, parts_a, parts_b, parts_z) -> None:
    la = np.concatenate([_to_global(s[0], b) for s, b in side_a])
    za = np.concatenate([s[1] for s, _ in side_a])
    lb = np.concatenate([_to_global(s[0], b) for s, b in side_b])
    zb = np.concatenate([s[1] for s, _ in side_b])
    ea, eb, ez = _tk.seam_edges(la.astype(np.int32), za, lb.astype(np.int32), zb)
    parts_a.append(ea.astype(np.int64))
    parts_b.append(eb.astype(np.int64))
    parts_z.append(ez.astype(np.float64))


def raise_tile(filled: np.ndarray, labels: np.ndarray, spill: np.ndarray, z: np.ndarray | None = None) -> int:
    """Stage 3: lift every cell of a tile to its label's spill level (in place).

    Returns the number of cells now above ``z`` (the tile's raw elevations), or 0 without ``z``.
    """
    flat = filled.reshape(-1)
    if not np.shares_memory(flat, filled):
        raise GridError("raise_tile needs a contiguous tile")
    raw = np.empty(0, dtype=filled.dtype) if z is None else np.ascontiguousarray(z, dtype=filled.dtype).reshape(-1)
    return int(_tk.raise_cells(flat, np.ascontiguousarray(labels).reshape(-1), spill, raw))


def fill_depressions_tiled(
    z: np.ndarray,
    valid: np.ndarray,
    outlets: np.ndarray,
    *,
    tile_rows: int,
    threads: int = 1,
) -> tuple[np.ndarray, int]:
    """Priority-Flood fill of an in-memory grid in strips of ``tile_rows`` rows on ``threads`` threads.

    Same arguments and result as :func:`divides.terrain.conditioning.fill_depressions`;
    strips span the whole width so each is filled in place in the output.
    """
    rows, cols = z.shape
    grid = TileGrid(rows, cols, max(2, tile_rows), max(2, cols))
    dtype = z.dtype if z.dtype in (np.float32, np.float64) else np.float64
    filled = np.array(z, dtype=dtype, order="C", copy=True)
    labels = np.empty((rows, cols), dtype=np.int32)
    valid = np.ascontiguousarray(valid)
    outlets = np.ascontiguousarray(outlets)
    tiles = list(grid.tiles())

    def stage1(t):
        r0, r1, _, _ = grid.window(*t)
        strip = filled[r0:r1]
        return flood_tile_summary(strip, valid[r0:r1], outlets[r0:r1], filled=strip, labels=labels[r0:r1])[2]

    floods = dict(zip(tiles, _run(stage1, tiles, threads)))
    spills = spill_levels(floods, grid)

    def stage3(t):
        r0, r1, _, _ = grid.window(*t)
        return raise_tile(filled[r0:r1], labels[r0:r1], spills[t], z[r0:r1])

    n_raised = sum(_run(stage3, tiles, threads))
    return filled, n_raised


def _run(fn: Callable, items: Iterable, threads: int) -> list:
    items = list(items)
    if threads <= 1 or len(items) <= 1:
        return [fn(t) for t in items]
    with ThreadPoolExecutor(max_workers=threads) as pool:
        return list(pool.map(fn, items))
