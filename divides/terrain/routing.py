"""D8 flow routing: receivers, topological order, drainage area and upstream integrals."""

from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager
from dataclasses import dataclass, field
from functools import cached_property

import numba
import numpy as np

from divides.errors import GridError, InternalError
from divides.io.dem import Dem
from divides.terrain import _routing_kernels as _k
from divides.terrain.conditioning import PARALLEL_MIN_CELLS, Conditioned, condition

__all__ = ["FlowGraph", "route", "DIRECTION_OUTLET", "DIRECTION_INVALID"]

DIRECTION_OUTLET = _k.OUTLET
DIRECTION_INVALID = _k.INVALID

#: Grids smaller than this are routed on one numba thread (see :func:`_threads_for`).
PARALLEL_ROUTING_MIN_CELLS = PARALLEL_MIN_CELLS


@dataclass(frozen=True, eq=False)
class FlowGraph:
    """Single-direction (D8) flow over a conditioned DEM.

    Build it with :func:`route`. Flat arrays are indexed ``i = row * cols + col``.

    Attributes
    ----------
    dem : Dem
        The DEM routed (its raw elevations untouched).
    conditioned : Conditioned
        The surface flow was routed on, with the filled/breached figures.
    receivers : ndarray of int
        Flat index of each cell's receiver; the cell itself at outlets and invalid cells.
    direction : ndarray of uint8
        Neighbour code of the receiver: 0-7 = E, SE, S, SW, W, NW, N, NE;
        8 = outlet (drains off the grid); 255 = invalid.
    order : ndarray of int
        Valid cells, each after its receiver (outlets first); iterate it
        backwards to go from the heads down.
    area : ndarray of float64, 2-D
        Drainage area in m² (the cell's own area included); 0 on invalid cells.
    n_flat_cells : int
        Cells routed by flat resolution rather than by a downhill neighbour.
    """

    dem: Dem
    conditioned: Conditioned
    receivers: np.ndarray
    direction: np.ndarray
    order: np.ndarray
    area: np.ndarray
    n_flat_cells: int = 0
    _cache: dict = field(default_factory=dict, repr=False)

    @property
    def shape(self) -> tuple[int, int]:
        """``(rows, cols)`` of the DEM."""
        return self.dem.shape

    @cached_property
    def _row_distances(self) -> np.ndarray:
        return _k.row_distances(self.dem.dx, self.dem.dy)

    @cached_property
    def distance(self) -> np.ndarray:
        """Flat array: distance (m) from each cell to its receiver (0 at outlets)."""
        out = np.zeros(self.receivers.size, dtype=np.float64)
        _k.receiver_distance(self.receivers, self.direction, self.shape[1], self._row_distances, out)
        return out

    def distance_at(self, cells: np.ndarray) -> np.ndarray:
        """:attr:`distance` at some cells only (flat indices), without building it for the grid."""
        if "distance" in self.__dict__:
            return self.distance[cells]
        cells = np.asarray(cells)
        code = self.direction.ravel()[cells]
        step = self._row_distances[cells // self.shape[1], np.minimum(code, 7)]
        return np.where(code < 8, step, 0.0)

    @cached_property
    def outlets(self) -> np.ndarray:
        """Flat indices of the valid cells that drain off the grid."""
        idx = self.order
        return idx[self.receivers[idx] == idx]

    @cached_property
    def order_position(self) -> np.ndarray:
        """Flat array: position of each cell in :attr:`order` (-1 for invalid cells)."""
        pos = np.full(self.receivers.size, -1, dtype=self.receivers.dtype)
        pos[self.order] = np.arange(self.order.size, dtype=self.receivers.dtype)
        return pos

    @cached_property
    def upstream_count(self) -> np.ndarray:
        """Flat array: number of cells draining through each cell, itself included.

        The order is depth-first, so the cells upstream of ``i`` are exactly
        ``order[order_position[i] : order_position[i] + upstream_count[i]]``.
        """
        # integer counts summed straight into the index dtype (no float64 grid on the way)
        counts = np.zeros(self.receivers.size, dtype=self.receivers.dtype)
        _k.accumulate_down(self.order, self.receivers, self.dem.valid.ravel(), counts)
        return counts

    def runs_of(self, cells: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """:attr:`order_position` and :attr:`upstream_count` at some cells (flat indices).

        Uses the cached grids when they exist; otherwise builds them for this call
        only and lets them go (a caller about to build grid-sized arrays of its own
        need not hold them too).
        """
        if "order_position" in self.__dict__ and "upstream_count" in self.__dict__:
            return self.order_position[cells], self.upstream_count[cells]
        itype = self.receivers.dtype
        position = np.full(self.receivers.size, -1, dtype=itype)
        position[self.order] = np.arange(self.order.size, dtype=itype)
        p = position[cells]
        del position
        counts = np.zeros(self.receivers.size, dtype=itype)
        _k.accumulate_down(self.order, self.receivers, self.dem.valid.ravel(), counts)
        return p, counts[cells]

    def upstream_cells(self, i: int) -> np.ndarray:
        """Flat indices of the cells draining through cell ``i`` (itself first)."""
        p = int(self.order_position[i])
        if p < 0:
            return np.empty(0, dtype=self.order.dtype)
        return self.order[p: p + int(self.upstream_count[i])]

    # ------------------------------------------------------------------ traversals
    def _flat_field(self, values: np.ndarray | float, name: str) -> np.ndarray:
        arr = np.asarray(values, dtype=np.float64)
        if arr.ndim == 0:
            return np.full(self.receivers.size, float(arr))
        if arr.shape != self.shape:
            raise GridError(f"{name} must have the DEM's shape {self.shape}; got {arr.shape}")
        return np.ascontiguousarray(arr).ravel()

    def accumulate(self, values: np.ndarray | float) -> np.ndarray:
        """Sum ``values`` over each cell and everything upstream of it.

        Parameters
        ----------
        values : ndarray (DEM shape) or float
            Per-cell quantity, e.g. ``runoff * cell area`` for a discharge proxy.

        Returns
        -------
        ndarray, 2-D
            The upstream sums (0 on invalid cells).
        """
        vals = self._flat_field(values, "values")
        out = np.zeros(self.receivers.size, dtype=np.float64)
        _k.accumulate_down(self.order, self.receivers, vals, out)
        return out.reshape(self.shape)

    def weighted_area(self, runoff: np.ndarray | float) -> np.ndarray:
        """Runoff-weighted drainage area, ∑ runoff × cell area upstream (m² × runoff unit).

        Parameters
        ----------
        runoff : ndarray (DEM shape) or float
            Relative runoff or precipitation per cell; NaN counts as 0.
        """
        r = np.nan_to_num(self._flat_field(runoff, "runoff"), nan=0.0).reshape(self.shape)
        return self.accumulate(r * self.dem.cell_area_grid())

    def integrate_upstream(self, integrand: np.ndarray | float, *, start: np.ndarray | float = 0.0) -> np.ndarray:
        """Integrate a field upstream along flow paths: ``F(i) = F(receiver) + f(i) · d(i)``.

        With ``f = (A0 / A) ** theta`` this is χ; with ``f = 1`` it is the flow
        distance from the outlet.

        Parameters
        ----------
        integrand : ndarray (DEM shape) or float
            f at each cell, applied over the step from the cell to its receiver.
        start : ndarray (DEM shape) or float
            Value at the outlets.

        Returns
        -------
        ndarray, 2-D
            The integral (NaN on invalid cells).
        """
        f = self._flat_field(integrand, "integrand")
        s = self._flat_field(start, "start")
        out = np.full(self.receivers.size, np.nan)
        _k.integrate_up(self.order, self.receivers, self.distance, f, s, out)
        return out.reshape(self.shape)

    def flow_distance(self) -> np.ndarray:
        """Distance (m) along flow paths from each cell to its outlet."""
        return self.integrate_upstream(1.0)

    def basins(self) -> np.ndarray:
        """Basin label of each cell: 1 for the largest basin, 2 the next, …; 0 where invalid."""
        if "basins" not in self._cache:
            outlets = self.outlets
            ranking = np.argsort(-self.area.ravel()[outlets], kind="stable")
            ids = np.zeros(self.receivers.size, dtype=np.float64)
            ids[outlets[ranking]] = np.arange(1, outlets.size + 1)
            out = np.zeros(self.receivers.size, dtype=np.float64)
            _k.propagate_up(self.order, self.receivers, ids, out)
            self._cache["basins"] = out.astype(np.int32).reshape(self.shape)
        return self._cache["basins"]

    def donors(self) -> tuple[np.ndarray, np.ndarray]:
        """Donor lists in compressed form: donors of i are ``donors[start[i]:start[i + 1]]``."""
        rec = self.receivers
        idx = np.flatnonzero(rec != np.arange(rec.size))
        counts = np.bincount(rec[idx], minlength=rec.size)
        start = np.zeros(rec.size + 1, dtype=np.int64)
        np.cumsum(counts, out=start[1:])
        donors = idx[np.argsort(rec[idx], kind="stable")].astype(rec.dtype)
        return start, donors


def route(
    dem: Dem,
    *,
    conditioning: str | Conditioned = "fill",
    sea_level: float | None = None,
    breach_max_length_m: float | None = None,
    breach_max_depth_m: float | None = None,
    closed_edges=(),
) -> FlowGraph:
    """Route flow over a DEM by steepest descent (D8).

    Parameters
    ----------
    dem : Dem
        The DEM; its elevations are not modified.
    conditioning : {"fill", "breach"} or Conditioned
        How depressions are removed first (see :func:`condition`), or an
        already conditioned surface.
    sea_level : float, optional
        Cells at or below it drain off the grid.
    breach_max_length_m, breach_max_depth_m : float, optional
        Limits of breach paths when ``conditioning="breach"``.
    closed_edges : iterable of str
        Grid edges across which no water leaves (see :func:`outlet_mask`).

    Returns
    -------
    FlowGraph

    Notes
    -----
    Each cell drains to the neighbour of steepest descent, slopes measured
    over true distances (per-row cell widths on geographic grids, diagonals
    included; O'Callaghan & Mark 1984). Flats left by filling are routed
    toward their exits and away from higher ground (Barnes, Lehman & Mulla
    2014). Cells on the DEM edge, next to nodata or at or below ``sea_level``
    are outlets.

    Examples
    --------
    >>> import numpy as np
    >>> from divides import Dem, route
    >>> z = np.add.outer(np.arange(5.0), np.zeros(4))  # rises southward
    >>> flow = route(Dem.from_array(z, cell_size=10.0))
    >>> float(flow.area.max())  # the north edge collects one column of interior cells
    400.0
    """
    if not isinstance(conditioning, Conditioned):  # inside a tiled_routing block: route by tiles
        from divides.terrain.tiled_flow import route_if_planned

        tiled = route_if_planned(dem, conditioning=conditioning, sea_level=sea_level, closed_edges=closed_edges)
        if tiled is not None:
            return tiled
    if isinstance(conditioning, Conditioned):
        cond = conditioning
        if cond.surface.shape != dem.shape:
            raise GridError(f"the conditioned surface has shape {cond.surface.shape}, the DEM {dem.shape}")
    else:
        cond = condition(
            dem,
            method=conditioning,
            sea_level=sea_level,
            breach_max_length_m=breach_max_length_m,
            breach_max_depth_m=breach_max_depth_m,
            closed_edges=closed_edges,
        )
    rows, cols = dem.shape
    with _threads_for(rows * cols):
        return _route_conditioned(dem, cond)


@contextmanager
def _threads_for(n_cells: int):
    """Numba threads for routing ``n_cells``: one below :data:`PARALLEL_ROUTING_MIN_CELLS`.

    Launching parallel kernels costs more than it saves on small grids (a forward run routes a
    90 000-cell model grid 30 times: 8 times the CPU time on two threads when the cores are busy);
    the result is the same on any number of threads. ``set_num_threads`` is per calling thread.
    """
    before = numba.get_num_threads()
    if n_cells >= PARALLEL_ROUTING_MIN_CELLS or before == 1:
        yield
        return
    numba.set_num_threads(1)
    try:
        yield
    finally:
        numba.set_num_threads(before)


def _route_conditioned(dem: Dem, cond: Conditioned) -> FlowGraph:
    rows, cols = dem.shape
    n = rows * cols
    itype = np.int32 if n < 2**31 - 1 else np.int64
    z = cond.surface.ravel()
    valid = dem.valid.ravel()
    dist = _k.row_distances(dem.dx, dem.dy)
    rec = np.empty(n, dtype=itype)
    code = np.empty(n, dtype=np.uint8)
    n_flat = _k.d8_steepest(z, valid, cond.outlets.ravel(), rows, cols, dist, rec, code)
    if n_flat:
        n_stuck = _k.resolve_flats(z, rows, cols, dist, rec, code)
        if n_stuck:
            raise InternalError(f"{n_stuck} cell(s) on flats found no exit after conditioning")
    n_valid = int(np.count_nonzero(valid))
    order, starts = flow_order(code, valid, rows, cols, n_valid, itype)
    if order.size != n_valid:
        raise InternalError("the receiver graph has a cycle")
    area = np.zeros(n, dtype=np.float64)
    _k.accumulate_area(order, rec, starts, cols, np.ascontiguousarray(dem.cell_area, dtype=np.float64),
                       numba.get_num_threads(), area)
    return FlowGraph(
        dem=dem,
        conditioned=cond,
        receivers=rec,
        direction=code,
        order=order,
        area=area.reshape(rows, cols),
        n_flat_cells=int(n_flat),
    )


def flow_order(code: np.ndarray, valid: np.ndarray, rows: int, cols: int, n_valid: int,
               itype=np.int32) -> tuple[np.ndarray, np.ndarray]:
    """Topological order of the valid cells from their D8 codes, and where each outlet's basin starts.

    The order is :func:`~divides.terrain._routing_kernels.topological_order`'s (depth-first
    from each outlet in index order); ``starts`` holds each basin's first position and
    ``order.size`` last. On more than one numba thread the basins are ordered on Python
    threads, each taking the next small group of outlets when it is free (basin sizes are
    not known beforehand) into a buffer of its own; the groups are then joined in outlet
    order, so the order is the same on any number of threads. Shorter than ``n_valid``
    when the codes hold a cycle.
    """
    roots = _k.outlet_roots(code, valid)
    m = roots.size
    sizes = np.empty(m, dtype=np.int64)
    threads = numba.get_num_threads()
    if threads == 1 or m < 2:
        order = np.empty(n_valid, dtype=itype)
        end = _k.order_from_codes(code, valid, rows, cols, roots, 0, m, order, 0, np.empty(n_valid, dtype=itype),
                                  sizes)
        order = order[:end].copy() if end < n_valid else order
    else:
        step = max(1, m // (256 * threads))  # small groups: a few large basins still spread over the threads
        groups = [(lo, min(lo + step, m)) for lo in range(0, m, step)]
        claim = iter(range(len(groups)))
        lock = threading.Lock()

        def work(_):
            buf, stack = np.empty(n_valid, dtype=itype), np.empty(n_valid, dtype=itype)  # touched as filled
            end, spans = 0, []
            while True:
                with lock:
                    g = next(claim, None)
                if g is None:
                    return buf, spans
                start = end
                end = _k.order_from_codes(code, valid, rows, cols, roots, *groups[g], buf, end, stack, sizes)
                spans.append((g, start, end))

        with ThreadPoolExecutor(max_workers=threads) as pool:
            done = list(pool.map(work, range(threads)))
        pieces = [None] * len(groups)
        for buf, spans in done:
            for g, a, b in spans:
                pieces[g] = buf[a:b]
        order = np.concatenate(pieces).astype(itype, copy=False)
        del done, pieces
    starts = np.zeros(m + 1, dtype=np.int64)
    np.cumsum(sizes, out=starts[1:])
    return order, starts
