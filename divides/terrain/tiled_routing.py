"""Conditioning and D8 routing of a DEM tile by tile, for grids larger than memory.

Every stage is a function of one tile (run as Dask tasks or on threads) or of
small per-tile summaries (run once):

1. flood each tile, label its watersheds (Barnes 2016), solve the label graph,
   raise each tile to its spill levels: the filled surface;
2. D8 steepest descent on each tile with a two-cell halo of the filled surface;
   flats inside a tile are resolved there (Barnes, Lehman & Mulla 2014), flats
   that cross a seam are resolved once on a window holding the whole flat;
3. accumulate drainage area in each tile, solve the graph of flows between
   tile perimeters (Barnes 2017), and accumulate again with the inflows.

Filled elevations (float32) and D8 codes equal :func:`divides.terrain.routing.route`
on the same DEM exactly; drainage areas are the same sums taken in another
order (equal bit for bit when cell areas are whole numbers of m²).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from functools import partial

import numpy as np

from divides.errors import GridError
from divides.io.tiles import ScratchTiles, TileGrid
from divides.terrain import _routing_kernels as _rk
from divides.terrain import _tiled_kernels as _tk
from divides.terrain.conditioning import EDGE_NAMES, _check_closed, outlet_cells
from divides.terrain.tiled_fill import flood_tile_summary, raise_tile, spill_levels

__all__ = ["TileSource", "ArraySource", "TiledRouting", "route_tiled", "serial_map"]

#: Largest flat (cells of its window) resolved across tiles in memory.
MAX_FLAT_WINDOW_CELLS = 2**28


class TileSource:
    """What the tiled path needs of a DEM: its shape, per-row cell sizes and windows of cells.

    Subclasses set ``shape``, ``dx``, ``dy``, ``cell_area`` (per row, metres)
    and implement :meth:`read`.
    """

    shape: tuple[int, int]
    dx: np.ndarray
    dy: np.ndarray
    cell_area: np.ndarray

    def read(self, r0: int, r1: int, c0: int, c1: int) -> tuple[np.ndarray, np.ndarray]:
        """Elevations (float32, NaN where invalid) and the valid mask of rows r0:r1, columns c0:c1."""
        raise NotImplementedError


class ArraySource(TileSource):
    """A DEM already in memory, read tile by tile (for tests and for threads)."""

    def __init__(self, dem) -> None:
        self.shape = dem.shape
        self.dx, self.dy, self.cell_area = dem.dx, dem.dy, dem.cell_area
        self._z, self._valid = dem.elevation, dem.valid

    def read(self, r0, r1, c0, c1):
        return self._z[r0:r1, c0:c1].astype(np.float32), self._valid[r0:r1, c0:c1].copy()


def serial_map(fn: Callable, items: list) -> list:
    """Run ``fn`` on each item here, in order (the scheduler of tests and small grids)."""
    return [fn(item) for item in items]


@dataclass
class TiledRouting:
    """Result of :func:`route_tiled`: per-tile ``filled``, ``code`` and ``area`` arrays in ``store``."""

    grid: TileGrid
    store: ScratchTiles
    n_crossing_flats: int = 0

    def assemble(self, name: str) -> np.ndarray:
        """The whole grid of ``name`` (only for grids that fit in memory)."""
        return _window(self.store, self.grid, name, 0, self.grid.rows, 0, self.grid.cols)


# ---------------------------------------------------------------------- helpers
def _window(store: ScratchTiles, grid: TileGrid, name: str, r0: int, r1: int, c0: int, c1: int) -> np.ndarray:
    """Cells r0:r1, c0:c1 of the per-tile arrays ``name``."""
    out = None
    ti0, ti1 = r0 // grid.tile_rows, (r1 - 1) // grid.tile_rows
    tj0, tj1 = c0 // grid.tile_cols, (c1 - 1) // grid.tile_cols
    for ti in range(ti0, ti1 + 1):
        for tj in range(tj0, tj1 + 1):
            tr0, tr1, tc0, tc1 = grid.window(ti, tj)
            block = store.get(name, (ti, tj))
            if out is None:
                out = np.empty((r1 - r0, c1 - c0), dtype=block.dtype)
            a0, a1, b0, b1 = max(r0, tr0), min(r1, tr1), max(c0, tc0), min(c1, tc1)
            out[a0 - r0: a1 - r0, b0 - c0: b1 - c0] = block[a0 - tr0: a1 - tr0, b0 - tc0: b1 - tc0]
    return out


def _open_sides(grid: TileGrid, win: tuple[int, int, int, int], open_edges: dict) -> dict:
    """Which sides of a window are open DEM edges."""
    r0, r1, c0, c1 = win
    return {"north": r0 == 0 and open_edges["north"], "south": r1 == grid.rows and open_edges["south"],
            "west": c0 == 0 and open_edges["west"], "east": c1 == grid.cols and open_edges["east"]}


# ---------------------------------------------------------------------- stage 1: filling
def _flood(t, *, source: TileSource, store: ScratchTiles, grid: TileGrid, open_edges: dict, sea_level):
    r0, r1, c0, c1 = grid.window(*t)
    win = grid.halo_window(*t, 1)
    z, valid = source.read(*win)
    outlets = outlet_cells(valid, z, _open_sides(grid, win, open_edges), sea_level)
    crop = np.s_[r0 - win[0]: r1 - win[0], c0 - win[2]: c1 - win[2]]
    z, valid, outlets = np.ascontiguousarray(z[crop]), np.ascontiguousarray(valid[crop]), outlets[crop].copy()
    filled, labels, summary = flood_tile_summary(z, valid, outlets)
    store.put("valid", t, valid)
    store.put("outlets", t, outlets)
    store.put("filled", t, filled)
    store.put("label", t, labels)
    return summary


def _raise(item, *, store: ScratchTiles):
    t, spill = item
    filled = store.get("filled", t)
    raise_tile(filled, store.get("label", t), spill)
    store.put("filled", t, filled)


# ---------------------------------------------------------------------- stage 2: D8 and flats
def _d8_window(z, valid, outlets, win, grid: TileGrid, source: TileSource):
    """D8 codes of a window whose inner sides are closed by forced outlets; returns (code, pending)."""
    r0, r1, c0, c1 = win
    rows, cols = r1 - r0, c1 - c0
    forced = outlets.copy()
    if r0 > 0:
        forced[0, :] |= valid[0, :]
    if r1 < grid.rows:
        forced[-1, :] |= valid[-1, :]
    if c0 > 0:
        forced[:, 0] |= valid[:, 0]
    if c1 < grid.cols:
        forced[:, -1] |= valid[:, -1]
    zf = np.ascontiguousarray(z).ravel()
    dist = _rk.row_distances(source.dx[r0:r1], source.dy[r0:r1])
    rec = np.empty(rows * cols, dtype=np.int64)
    code = np.empty(rows * cols, dtype=np.uint8)
    n_pending = _rk.d8_steepest(zf, np.ascontiguousarray(valid).ravel(), forced.ravel(), rows, cols, dist, rec, code)
    pending = code == _rk.PENDING
    if n_pending:
        _rk.resolve_flats(zf, rows, cols, dist, rec, code)  # flats cut by the window stay pending
    return code.reshape(rows, cols), pending.reshape(rows, cols)


def _d8(t, *, source: TileSource, store: ScratchTiles, grid: TileGrid):
    r0, r1, c0, c1 = grid.window(*t)
    win = grid.halo_window(*t, 2)
    z = _window(store, grid, "filled", *win)
    valid = _window(store, grid, "valid", *win)
    outlets = _window(store, grid, "outlets", *win)
    code, pending = _d8_window(z, valid, outlets, win, grid, source)
    # flats reaching the halo continue in another tile: they are resolved once, whole
    inside = np.zeros(pending.shape, dtype=bool)
    crop = np.s_[r0 - win[0]: r1 - win[0], c0 - win[2]: c1 - win[2]]
    inside[crop] = True
    seeds = np.flatnonzero((pending & ~inside).ravel())
    crossing = np.zeros(pending.shape, dtype=bool)
    if seeds.size:
        rows, cols = pending.shape
        reached = _tk.spread_flat(np.ascontiguousarray(z).ravel(), pending.ravel(), rows, cols, seeds)
        crossing = reached.reshape(pending.shape).astype(bool) & inside
    store.put("code", t, np.ascontiguousarray(code[crop]))
    rr, cc = np.nonzero(crossing[crop])
    return (rr + r0).astype(np.int64) * grid.cols + (cc + c0)


def _resolve_crossing_flats(cells: np.ndarray, *, source: TileSource, store: ScratchTiles, grid: TileGrid) -> int:
    """Route every flat that crosses a seam on one window holding all of it (plus two cells).

    The cells of crossing flats reported by the tiles are joined into groups of
    8-connected cells (touching flats of different elevations may share a
    group, which costs only a larger window); each group is routed once.
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    gid = np.unique(cells)
    rows, cols = np.divmod(gid, grid.cols)
    pairs_a, pairs_b = [], []
    for dr, dc in ((0, 1), (1, -1), (1, 0), (1, 1)):  # each neighbour pair once
        nr, nc = rows + dr, cols + dc
        ok = (nr < grid.rows) & (nc >= 0) & (nc < grid.cols)
        target = nr * grid.cols + nc
        pos = np.minimum(np.searchsorted(gid, target), gid.size - 1)
        hit = ok & (gid[pos] == target)
        pairs_a.append(np.flatnonzero(hit))
        pairs_b.append(pos[hit])
    a, b = np.concatenate(pairs_a), np.concatenate(pairs_b)
    graph = coo_matrix((np.ones(a.size, dtype=np.int8), (a, b)), shape=(gid.size, gid.size))
    n_groups, group = connected_components(graph, directed=False)
    order = np.argsort(group, kind="stable")
    bounds = np.searchsorted(group[order], np.arange(n_groups + 1))
    for g in range(n_groups):
        members = order[bounds[g]: bounds[g + 1]]
        r, c = rows[members], cols[members]
        win = (max(0, int(r.min()) - 2), min(grid.rows, int(r.max()) + 3),
               max(0, int(c.min()) - 2), min(grid.cols, int(c.max()) + 3))
        if (win[1] - win[0]) * (win[3] - win[2]) > MAX_FLAT_WINDOW_CELLS:
            raise GridError(f"a flat of the filled DEM near row {int(r[0])}, column {int(c[0])} spans more than "
                            f"{MAX_FLAT_WINDOW_CELLS} cells; route a smaller window (--bounds)")
        z = np.ascontiguousarray(_window(store, grid, "filled", *win))
        valid = _window(store, grid, "valid", *win)
        outlets = _window(store, grid, "outlets", *win)
        code, _ = _d8_window(z, valid, outlets, win, grid, source)
        _scatter(store, grid, "code", gid[members], code[r - win[0], c - win[2]])
    return n_groups


def _scatter(store: ScratchTiles, grid: TileGrid, name: str, gids: np.ndarray, values: np.ndarray) -> None:
    rows, cols = np.divmod(gids, grid.cols)
    ti, tj = rows // grid.tile_rows, cols // grid.tile_cols
    for a, b in set(zip(ti.tolist(), tj.tolist())):
        sel = (ti == a) & (tj == b)
        r0, _, c0, _ = grid.window(a, b)
        block = store.get(name, (a, b))
        block[rows[sel] - r0, cols[sel] - c0] = values[sel]
        store.put(name, (a, b), block)


# ---------------------------------------------------------------------- stage 3: accumulation
def _tile_values(t, source: TileSource, store: ScratchTiles, grid: TileGrid):
    r0, r1, c0, c1 = grid.window(*t)
    code = np.ascontiguousarray(store.get("code", t))
    valid = store.get("valid", t)
    rows, cols = code.shape
    rec, exit_k = _tk.tile_graph(code.ravel(), rows, cols)
    flat_valid = valid.ravel()
    order = _rk.topological_order(rec, flat_valid, int(np.count_nonzero(flat_valid)))
    values = np.where(valid, source.cell_area[r0:r1, None], 0.0).ravel()
    return (r0, r1, c0, c1), rec, exit_k, order, values


def _local_flows(t, *, source: TileSource, store: ScratchTiles, grid: TileGrid):
    (r0, r1, c0, c1), rec, exit_k, order, values = _tile_values(t, source, store, grid)
    rows, cols = r1 - r0, c1 - c0
    acc = np.zeros(rows * cols)
    _rk.accumulate_down(order, rec, values, acc)
    perimeter = np.zeros((rows, cols), dtype=bool)
    perimeter[[0, -1], :] = True
    perimeter[:, [0, -1]] = True
    perimeter = (perimeter.ravel() & store.get("valid", t).ravel())
    nxt = _tk.next_perimeter(order, rec, perimeter)
    idx = np.flatnonzero(perimeter)
    lr, lc = np.divmod(idx, cols)
    gid = (lr + r0).astype(np.int64) * grid.cols + (lc + c0)
    down_same = np.where(nxt[idx] >= 0, ((nxt[idx] // cols) + r0) * grid.cols + (nxt[idx] % cols) + c0, -1)
    k = exit_k[idx].astype(np.int64)
    out = k >= 0
    kk = np.where(out, k, 0)
    cross = np.where(out, (lr + r0 + _rk.D_ROW[kk]) * grid.cols + (lc + c0 + _rk.D_COL[kk]), -1)
    return gid, acc[idx], down_same.astype(np.int64), cross.astype(np.int64)


def _final_area(item, *, source: TileSource, store: ScratchTiles, grid: TileGrid):
    t, gids, inflow = item
    (r0, r1, c0, c1), rec, _, order, values = _tile_values(t, source, store, grid)
    rows, cols = r1 - r0, c1 - c0
    if gids.size:
        gr, gc = np.divmod(gids, grid.cols)
        values[(gr - r0) * cols + (gc - c0)] += inflow
    area = np.zeros(rows * cols)
    _rk.accumulate_down(order, rec, values, area)
    store.put("area", t, area.reshape(rows, cols))


def _edge_flows(flows: dict, grid: TileGrid) -> dict:
    """Inflow at each tile's perimeter cells from the tile-level graph of edge flows."""
    tiles = list(grid.tiles())
    gid = np.concatenate([flows[t][0] for t in tiles])
    acc = np.concatenate([flows[t][1] for t in tiles])
    same = np.concatenate([flows[t][2] for t in tiles])
    cross = np.concatenate([flows[t][3] for t in tiles])
    order = np.argsort(gid)
    gid, acc, same, cross = gid[order], acc[order], same[order], cross[order]

    def index(targets):
        pos = np.searchsorted(gid, np.maximum(targets, 0))
        pos = np.minimum(pos, gid.size - 1)
        return np.where((targets >= 0) & (gid[pos] == targets), pos, -1)

    inflow, _, n_done = _tk.perimeter_flows(gid, acc, index(same), index(cross))
    if n_done != gid.size:
        raise GridError("the flow between tiles has a cycle; the D8 codes are inconsistent")
    rows = gid // grid.cols
    cols = gid % grid.cols
    ti, tj = rows // grid.tile_rows, cols // grid.tile_cols
    out = {}
    has = inflow != 0
    for t in tiles:
        sel = has & (ti == t[0]) & (tj == t[1])
        out[t] = (gid[sel], inflow[sel])
    return out


# ---------------------------------------------------------------------- the whole path
def route_tiled(
    source: TileSource,
    *,
    tile_shape: tuple[int, int],
    store: ScratchTiles | None = None,
    mapper: Callable[[Callable, list], list] = serial_map,
    sea_level: float | None = None,
    closed_edges=(),
) -> TiledRouting:
    """Fill, route (D8) and accumulate drainage area tile by tile.

    Parameters
    ----------
    source : TileSource
        The DEM (:class:`ArraySource`, or :class:`divides.io.tiles.RasterTiles` for a file).
    tile_shape : (int, int)
        Rows and columns of a tile.
    store : ScratchTiles, optional
        Where tiles go between stages (default: in memory).
    mapper : callable
        ``mapper(fn, items)`` runs ``fn`` on every item and returns the results
        in order: :func:`serial_map`, threads, or a Dask client's ``map``.
    sea_level, closed_edges
        As in :func:`divides.terrain.routing.route`.

    Returns
    -------
    TiledRouting
        Per-tile ``filled`` (float32), ``code`` (uint8 D8 codes) and ``area`` (m²).
    """
    closed = _check_closed(closed_edges)
    open_edges = {side: side not in closed for side in EDGE_NAMES}
    rows, cols = source.shape
    grid = TileGrid(rows, cols, *tile_shape)
    store = store if store is not None else ScratchTiles()
    tiles = list(grid.tiles())
    floods = mapper(partial(_flood, source=source, store=store, grid=grid, open_edges=open_edges,
                            sea_level=sea_level), tiles)
    spills = spill_levels(dict(zip(tiles, floods)), grid)
    mapper(partial(_raise, store=store), [(t, spills[t]) for t in tiles])
    crossing = mapper(partial(_d8, source=source, store=store, grid=grid), tiles)
    cells = np.concatenate(crossing) if crossing else np.empty(0, dtype=np.int64)
    n_flats = _resolve_crossing_flats(cells, source=source, store=store, grid=grid) if cells.size else 0
    flows = dict(zip(tiles, mapper(partial(_local_flows, source=source, store=store, grid=grid), tiles)))
    inflows = _edge_flows(flows, grid)
    mapper(partial(_final_area, source=source, store=store, grid=grid), [(t, *inflows[t]) for t in tiles])
    return TiledRouting(grid=grid, store=store, n_crossing_flats=n_flats)


#: Files written by :func:`route_raster_tiled` and their GeoTIFF data types.
TILED_OUTPUTS = {"filled.tif": ("filled", "float32"), "d8.tif": ("code", "uint8"), "area.tif": ("area", "float64")}


def dask_map(client) -> Callable[[Callable, list], list]:
    """A ``mapper`` for :func:`route_tiled` running each item as a task on a Dask client."""

    def run(fn: Callable, items: list) -> list:
        return client.gather(client.map(fn, items, pure=False))

    return run


def route_raster_tiled(
    path,
    out_dir,
    *,
    tile: int = 2048,
    scheduler: str | None = None,
    workers: int | None = None,
    scratch=None,
    processes: bool = True,
    band: int = 1,
    vertical_unit: str = "m",
    nodata: float | None = None,
    sea_level: float | None = None,
    closed_edges=(),
) -> dict:
    """Fill, route and accumulate a raster larger than memory; write filled.tif, d8.tif and area.tif.

    Tiles are read with rasterio windows, kept between stages in a scratch
    folder and run as Dask tasks: on a new ``LocalCluster`` of ``workers``
    processes, or on the cluster at ``scheduler`` (whose workers must see
    ``path``, ``scratch`` and ``out_dir`` at the same paths). Holes of nodata
    inside the data are outlets here, as the raster stores them: the commands
    fill them in memory first (:func:`divides.terrain.voids.fill_voids`).

    Parameters
    ----------
    path : str or path
        The DEM (GeoTIFF or any raster rasterio reads by windows; north-up, with a CRS).
    out_dir : str or path
        Folder for the three GeoTIFFs (made if missing).
    tile : int
        Tile side in cells (memory per task is about 60 B per tile cell).
    scheduler, workers, processes
        See :func:`divides.terrain.cluster.cluster_client`.
    scratch : str or path, optional
        Folder for intermediate tiles (default: the system's temporary folder);
        needs about 23 B per DEM cell.
    band, vertical_unit, nodata
        As in :func:`divides.read_dem`.
    sea_level, closed_edges
        As in :func:`divides.terrain.routing.route`.

    Returns
    -------
    dict
        ``{"filled.tif": path, "d8.tif": path, "area.tif": path, "tiles": n, "crossing_flats": n}``.
    """
    import tempfile
    from pathlib import Path

    from divides.io.tiles import RasterTiles, write_tiles_geotiff
    from divides.terrain.cluster import cluster_client

    if not (isinstance(tile, int) and tile >= 16):
        from divides.errors import ParameterError

        raise ParameterError(f"tile must be a whole number of cells, at least 16; got {tile!r}")
    source = RasterTiles(path, band=band, vertical_unit=vertical_unit, nodata=nodata)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    store = ScratchTiles(scratch if scratch is not None else tempfile.gettempdir())
    try:
        with cluster_client(scheduler, workers=workers, processes=processes) as client:
            result = route_tiled(source, tile_shape=(tile, tile), store=store, mapper=dask_map(client),
                                 sea_level=sea_level, closed_edges=closed_edges)
        written = {}
        for name, (key, dtype) in TILED_OUTPUTS.items():
            write_tiles_geotiff(out / name, result.grid, partial(store.get, key), dtype=dtype,
                                transform=source.transform, crs=source.crs,
                                nodata=float("nan") if dtype.startswith("float") else _rk.INVALID)
            written[name] = out / name
    finally:
        store.close()
    return written | {"tiles": len(list(result.grid.tiles())), "crossing_flats": result.n_crossing_flats}
