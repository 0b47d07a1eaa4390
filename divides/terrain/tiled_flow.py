"""A :class:`FlowGraph` whose conditioning and routing ran tile by tile, for the commands' tiled path.

:func:`route_by_tiles` fills, routes and accumulates the DEM with
:func:`divides.terrain.tiled_routing.route_tiled` (Barnes 2016, 2017), the
intermediate tiles in a scratch folder on disk and the tiles on Dask threads,
then assembles the few grids the analyses need: the filled surface, the D8
codes and receivers, the depth-first order and the drainage area. The work
arrays of in-memory routing (the flood queue, flat distances, the padded
copy) never exist at grid size, so routing peaks at the assembled graph
(about 26 B per cell with the DEM) instead of about 45.

:func:`tiled_routing` makes :func:`divides.terrain.routing.route` take this
path inside a ``with`` block, so a whole command (an assessment's robustness
re-runs included) routes by tiles without changing the analyses.
"""

from __future__ import annotations

import contextlib
import contextvars
import functools
from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np

from divides.errors import InternalError, ParameterError
from divides.io.dem import Dem
from divides.io.tiles import ScratchTiles
from divides.terrain import _fill_kernels as _fk
from divides.terrain.conditioning import Conditioned, outlet_mask
from divides.terrain.routing import FlowGraph, flow_order

__all__ = ["TiledPlan", "route_by_tiles", "tiled_routing", "active_plan", "DEFAULT_TILE"]

#: Tile side (cells) of the commands' tiled path: about 60 B per tile cell per task (0.25 GB).
DEFAULT_TILE = 2048


@dataclass(frozen=True)
class TiledPlan:
    """How to route by tiles: tile side, scratch folder (None: the system's temporary folder), threads
    on this machine, or the address of a Dask scheduler whose workers run the tiles instead."""

    tile: int = DEFAULT_TILE
    scratch: str | None = None
    workers: int | None = None
    scheduler: str | None = None


_PLAN: contextvars.ContextVar[TiledPlan | None] = contextvars.ContextVar("divides_tiled_plan", default=None)


def active_plan() -> TiledPlan | None:
    """The plan of the enclosing :func:`tiled_routing` block, or None (route in memory)."""
    return _PLAN.get()


@contextlib.contextmanager
def tiled_routing(plan: TiledPlan | None) -> Iterator[None]:
    """Within the block, :func:`divides.terrain.routing.route` routes by tiles following ``plan`` (None: in memory)."""
    token = _PLAN.set(plan)
    try:
        yield
    finally:
        _PLAN.reset(token)


def _thread_map(workers: int | None):
    """A ``mapper`` running each tile as a Dask task on this process's threads (tile kernels release the GIL)."""
    import os

    n = max(1, workers or os.cpu_count() or 1)

    def run(fn, items):
        if n == 1 or len(items) <= 1:
            return [fn(item) for item in items]
        import dask

        return list(dask.compute(*[dask.delayed(fn, pure=False)(item) for item in items],
                                 scheduler="threads", num_workers=n))

    return run


def _cluster_map(client):
    """A ``mapper`` running each tile as a task on a Dask cluster (``client``).

    The stage functions come as ``functools.partial`` objects holding the DEM source: it is
    scattered to every worker once, not sent with each task; the scratch tiles travel as files
    (the workers must see the scratch folder at the same path).
    """
    sent: dict[int, tuple] = {}

    def run(fn, items):
        if not items:
            return []
        func, kwargs = (fn.func, dict(fn.keywords)) if isinstance(fn, functools.partial) and not fn.args else (fn, {})
        source = kwargs.get("source")
        if source is not None:
            if id(source) not in sent:  # keep the source itself too, so its id stays its own
                sent[id(source)] = (source, client.scatter(source, broadcast=True, hash=False))
            kwargs["source"] = sent[id(source)][1]
        return client.gather(client.map(func, items, pure=False, **kwargs))

    return run


def _receivers(code: np.ndarray, cols: int) -> np.ndarray:
    """Flat receiver of every cell from its D8 code (the cell itself for outlets and invalid cells)."""
    n = code.size
    itype = np.int32 if n < 2**31 - 1 else np.int64
    offsets = (_fk.D_ROW * cols + _fk.D_COL).astype(itype)
    rec = np.arange(n, dtype=itype)
    moves = code < 8
    rec[moves] += offsets[code[moves]]
    return rec


def route_by_tiles(dem: Dem, plan: TiledPlan | None = None, *, sea_level: float | None = None,
                   closed_edges=()) -> FlowGraph:
    """Fill, route and accumulate ``dem`` tile by tile and return the flow graph.

    Parameters
    ----------
    dem : Dem
        Routed as float32 (the tiled path's precision); a float32 DEM gives the
        same filled surface, D8 codes and order as :func:`divides.terrain.routing.route`,
        and the same drainage areas (bit for bit for whole m² cell areas).
    plan : TiledPlan, optional
        Tile side, scratch folder and threads (default :class:`TiledPlan`).
    sea_level, closed_edges
        As in :func:`divides.terrain.routing.route` (filling only: no breaching).

    Returns
    -------
    FlowGraph
    """
    from divides.terrain.tiled_routing import ArraySource, route_tiled

    plan = plan or TiledPlan()
    if not (isinstance(plan.tile, int) and plan.tile >= 16):
        raise ParameterError(f"tile must be a whole number of cells, at least 16; got {plan.tile!r}")
    import tempfile

    rows, cols = dem.shape
    store = ScratchTiles(plan.scratch if plan.scratch is not None else tempfile.gettempdir())
    try:
        with contextlib.ExitStack() as stack:
            if plan.scheduler is None:
                mapper = _thread_map(plan.workers)
            else:
                from divides.terrain.cluster import cluster_client

                mapper = _cluster_map(stack.enter_context(cluster_client(plan.scheduler)))
            result = route_tiled(ArraySource(dem), tile_shape=(plan.tile, plan.tile), store=store,
                                 mapper=mapper, sea_level=sea_level, closed_edges=closed_edges)
        code = result.assemble("code").ravel()
        filled = result.assemble("filled")
        area = result.assemble("area")
    finally:
        store.close()
    valid = dem.valid.ravel()
    rec = _receivers(code, cols)
    n_valid = int(np.count_nonzero(valid))
    order, _ = flow_order(code, valid, rows, cols, n_valid, rec.dtype)
    if order.size != n_valid:
        raise InternalError("the receiver graph of the tiled routing has a cycle")
    surface = filled if dem.elevation.dtype == np.float32 else filled.astype(dem.elevation.dtype)
    del filled
    z = dem.elevation
    with np.errstate(invalid="ignore"):
        n_raised = int(np.count_nonzero(surface > z))
    filled_area, filled_volume = _fk.raised_totals(surface.ravel(), z.ravel(), rows, cols, dem.cell_area)
    outlets = outlet_mask(dem, sea_level=sea_level, closed_edges=closed_edges)
    cond = Conditioned(surface=surface, outlets=outlets, method="fill", filled_cells=n_raised,
                       filled_area_m2=float(filled_area), filled_volume_m3=float(filled_volume),
                       carved_cells=0, carved_volume_m3=0.0, closed_edges=tuple(closed_edges))
    # cells routed over flats: those draining to a neighbour no lower on the filled surface
    flat = surface.ravel()
    moving = np.flatnonzero(code < 8)
    n_flat = int(np.count_nonzero(flat[rec[moving]] >= flat[moving]))
    return FlowGraph(dem=dem, conditioned=cond, receivers=rec, direction=code, order=order, area=area,
                     n_flat_cells=n_flat)


def route_if_planned(dem: Dem, *, conditioning, sea_level, closed_edges) -> FlowGraph | None:
    """:func:`route_by_tiles` when a :func:`tiled_routing` block is active, else None (route in memory).

    Raises
    ------
    ParameterError
        The tiled path was asked for with breaching (it fills only).
    """
    plan = active_plan()
    if plan is None:
        return None
    if conditioning != "fill":
        raise ParameterError("the tiled path conditions by filling only; drop --conditioning breach or --tiled")
    return route_by_tiles(dem, plan, sea_level=sea_level, closed_edges=closed_edges)

