"""The forward model: stream power, hillslope diffusion and uplift on a routed grid, through time."""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import ndimage

from divides.errors import ParameterError
from divides.io.dem import Dem
from divides.model import _stream_power_kernels as _spk
from divides.model.diffusion import CELL_ACTIVE, CELL_FIXED, CELL_INVALID, CELL_WALL, _Operator, check_diffusivity
from divides.model.forcing import EDGES, EdgeCondition, as_field, resolve_edges
from divides.model.stream_power import check_exponents, check_time_step
from divides.model.tracking import DivideTrack, _Tracker
from divides.terrain.conditioning import Conditioned, fill_depressions
from divides.terrain.routing import FlowGraph, route

__all__ = ["MassBudget", "SimulationResult", "simulate"]

#: Height given to wall cells in the routing surface: above any terrain, so
#: nothing drains into a wall and flats bend away from it.
_WALL_HEIGHT = 1.0e9


@dataclass(frozen=True, eq=False)
class MassBudget:
    """Volumes (m³) per time step over the active cells (outlets and walls excluded).

    Attributes
    ----------
    times : ndarray
        End time of each step (years).
    uplift_m3 : ndarray
        Rock added by uplift.
    eroded_m3 : ndarray
        Rock removed by stream-power erosion.
    diffused_out_m3 : ndarray
        Soil carried by hillslope diffusion into the outlet cells.
    storage_m3 : ndarray
        Change of the volume held by the active cells, measured on the
        surfaces before and after the step.
    """

    times: np.ndarray
    uplift_m3: np.ndarray
    eroded_m3: np.ndarray
    diffused_out_m3: np.ndarray
    storage_m3: np.ndarray

    @property
    def residual_m3(self) -> np.ndarray:
        """Uplift in − erosion out − diffusion out − storage change, per step (round-off)."""
        return self.uplift_m3 - self.eroded_m3 - self.diffused_out_m3 - self.storage_m3


@dataclass(frozen=True, eq=False)
class SimulationResult:
    """What :func:`simulate` returns.

    Attributes
    ----------
    times : ndarray
        Times of the snapshots (years since the start).
    snapshots : tuple of Dem
        The surface at each snapshot time (same grid as the start).
    final : Dem
        The surface at the end of the run.
    divide : DivideTrack or None
        Divide position between the tracked sides through time.
    budget : MassBudget
        Volumes per step.
    cell_kind : ndarray of uint8
        0 = active, 1 = outlet held at base level, 2 = wall of a closed edge,
        3 = invalid.
    n_steps : int
        Time steps taken.
    parameters : dict
        The effective parameters (JSON-ready where they are scalars).
    """

    times: np.ndarray
    snapshots: tuple[Dem, ...]
    final: Dem
    divide: DivideTrack | None
    budget: MassBudget
    cell_kind: np.ndarray
    n_steps: int
    parameters: dict

    def snapshot(self, t: float) -> Dem:
        """The snapshot taken at time ``t`` (years)."""
        hits = np.flatnonzero(np.isclose(self.times, t, rtol=1e-12, atol=1e-9))
        if hits.size == 0:
            raise ParameterError(f"no snapshot at t = {t!r} years; snapshots were taken at {self.times.tolist()}")
        return self.snapshots[int(hits[0])]


class _Grid:
    """Cell kinds, edge outlets and wall mirrors of the model grid."""

    def __init__(self, dem: Dem, edges: dict[str, EdgeCondition]) -> None:
        rows, cols = dem.shape
        valid = dem.valid
        closed = {e: not edges[e].is_open for e in EDGES}
        on = {
            "north": (np.arange(rows) == 0)[:, None] & np.ones(cols, bool),
            "south": (np.arange(rows) == rows - 1)[:, None] & np.ones(cols, bool),
            "west": np.ones(rows, bool)[:, None] & (np.arange(cols) == 0),
            "east": np.ones(rows, bool)[:, None] & (np.arange(cols) == cols - 1),
        }
        wall = np.zeros((rows, cols), dtype=bool)
        for e in EDGES:
            if closed[e]:
                wall |= on[e]
        wall &= valid
        near_invalid = ndimage.binary_dilation(~valid, structure=np.ones((3, 3), bool)) if not valid.all() else np.zeros_like(valid)
        open_edge = np.zeros((rows, cols), dtype=bool)
        for e in EDGES:
            if not closed[e]:
                open_edge |= on[e]
        base = valid & ~wall & (open_edge | near_invalid)
        if not base.any():
            raise ParameterError(
                "no cell of the grid can drain out: every open edge is covered by walls of closed edges "
                "or invalid cells; open an edge"
            )
        kind = np.full((rows, cols), CELL_ACTIVE, dtype=np.uint8)
        kind[base] = CELL_FIXED
        kind[wall] = CELL_WALL
        kind[~valid] = CELL_INVALID
        self.kind = kind
        self.valid = valid
        self.wall = wall
        self.base_mask = base
        self.base_idx = np.flatnonzero(base)
        self.active_idx = np.flatnonzero(kind == CELL_ACTIVE)
        self.active_flat = (kind == CELL_ACTIVE).ravel()
        # Per open edge: positions, within base_idx, of its outlet cells.
        r, c = np.divmod(self.base_idx, cols)
        edge_of = {"north": r == 0, "south": r == rows - 1, "west": c == 0, "east": c == cols - 1}
        self.edge_positions = {e: np.flatnonzero(edge_of[e]) for e in EDGES if not closed[e]}
        # A wall cell copies the nearest cell of the open interior rectangle, so walls
        # look like a zero-gradient continuation of the surface.
        wr, wc = np.divmod(np.flatnonzero(wall), cols)
        r_lo, r_hi = (1 if closed["north"] else 0), (rows - 2 if closed["south"] else rows - 1)
        c_lo, c_hi = (1 if closed["west"] else 0), (cols - 2 if closed["east"] else cols - 1)
        src = np.clip(wr, r_lo, r_hi) * cols + np.clip(wc, c_lo, c_hi)
        ok = valid.ravel()[src] & ~wall.ravel()[src]
        self.wall_idx = (wr * cols + wc)[ok]
        self.wall_src = src[ok]
        self.all_wall_idx = np.flatnonzero(wall)
        self.fill_outlets = base
        self.route_outlets = base | wall  # every edge cell is an outlet for D8 (no bounds checks)


def _as_start(surface: Dem | np.ndarray, cell_size: Any) -> Dem:
    if isinstance(surface, Dem):
        if cell_size is not None:
            raise ParameterError("`cell_size` is taken from the Dem; give it only with a plain array")
        z = np.array(surface.elevation, dtype=np.float64, order="C", copy=True)
        z[~surface.valid] = np.nan
        return dataclasses.replace(surface, elevation=z, meta=dict(surface.meta))
    if cell_size is None:
        raise ParameterError("`cell_size` (m) is required when the starting surface is a plain array; or pass a Dem")
    arr = np.asarray(surface, dtype=np.float64)
    return Dem.from_array(np.array(arr, copy=True), cell_size=cell_size, valid_range=None, copy=False)


def _time_breaks(duration: float, snapshot_times: Any) -> tuple[np.ndarray, list[float]]:
    if snapshot_times is None:
        snaps: list[float] = []
    else:
        try:
            snaps = sorted({float(t) for t in np.atleast_1d(np.asarray(snapshot_times, dtype=np.float64))})
        except (TypeError, ValueError) as exc:
            raise ParameterError(f"`snapshot_times` must be a sequence of times in years; got {snapshot_times!r}") from exc
        bad = [t for t in snaps if not (math.isfinite(t) and 0.0 <= t <= duration)]
        if bad:
            raise ParameterError(f"`snapshot_times` must lie within [0, duration = {duration:g}] years; got {bad}")
    breaks = sorted({t for t in snaps if t > 0.0} | {duration})
    return np.asarray(breaks), snaps


def simulate(
    surface: Dem | np.ndarray,
    *,
    duration: float,
    dt: float,
    uplift: float | np.ndarray,
    erodibility: float | np.ndarray,
    m: float = 0.5,
    n: float = 1.0,
    diffusivity: float = 0.0,
    runoff: float | np.ndarray | None = None,
    edges: Mapping[str, Any] | None = None,
    cell_size: float | tuple[float, float] | None = None,
    snapshot_times: Sequence[float] | None = None,
    track: tuple[str, str] | None = None,
    track_interval: float | None = None,
) -> SimulationResult:
    """Evolve a landscape by uplift, stream-power incision and hillslope diffusion.

    Parameters
    ----------
    surface : Dem or ndarray
        The starting surface (a real DEM or a synthetic grid; see
        :mod:`divides.model.scenarios`). Elevations in metres.
    duration : float
        Length of the run (years).
    dt : float
        Time step (years). Every scheme is implicit, so any step is stable;
        accuracy of transients needs steps a few times shorter than the time a
        knickpoint takes to cross a cell. Steps are shortened evenly so the
        run lands exactly on every snapshot time and on ``duration``.
    uplift : float or ndarray
        Rock uplift rate relative to base level, U (m/yr); constant or a raster.
    erodibility : float or ndarray
        K of E = K A^m S^n, in m^(1-2m)/yr so that E is in m/yr; constant
        or a raster; 0 turns channels off.
    m, n : float
        Area and slope exponents (concavity m/n).
    diffusivity : float
        Linear hillslope diffusivity D (m²/yr); 0 turns diffusion off.
    runoff : float or ndarray, optional
        Relative runoff (1 = reference). When given, the drainage area in the
        erosion law is the runoff-weighted area ∑ runoff × cell area, a
        discharge proxy.
    edges : mapping, optional
        Condition of each edge (``"north"``, ``"south"``, ``"west"``,
        ``"east"``): ``"open"`` (default: outlets held at their starting
        elevation), ``"closed"``, a base-level elevation in metres, or
        :func:`~divides.model.forcing.open_edge` with an elevation or lowering
        history.
    cell_size : float or (dx, dy), optional
        Cell size (m) when ``surface`` is a plain array.
    snapshot_times : sequence of float, optional
        Times (years, within ``[0, duration]``) at which to keep the surface.
    track : (str, str), optional
        Two opposite edges, e.g. ``("west", "east")``, whose divide is tracked.
    track_interval : float, optional
        Years between divide records (default: every step). The start and
        the end are always recorded.

    Returns
    -------
    SimulationResult

    Notes
    -----
    Each step (length h, from t to t + h):

    1. flow is routed on the current surface with the project's
       :func:`~divides.terrain.routing.route`, depressions filled first
       (Priority-Flood) so lakes cannot stall the run; the filled surface is
       used for routing only;
    2. open-edge outlets are set to their base level at t + h, then every
       active cell is uplifted and eroded by the implicit stream-power step
       (Braun & Willett 2013; Newton iteration for n != 1, Braun & Deal 2023);
       cells left in filled depressions are uplifted but not eroded;
    3. hillslope diffusion is applied by a backward-Euler step (operator
       splitting; see :func:`~divides.model.diffusion.diffusion_step`),
       outlets fixed (Dirichlet) and no flux across closed edges.

    Outlets are the cells of open edges and the cells next to nodata (held
    at their starting elevation). A closed edge is represented by its
    outermost ring of cells, made a wall: walls are never eroded, nothing
    drains into them (they stand above everything in the routing surface),
    no soil diffuses across their faces, and after each step they copy the
    nearest interior cell so that maps look continuous. Corners shared with
    a closed edge are walls; a corner of two open edges takes the lower of
    their base levels.

    Examples
    --------
    >>> import numpy as np
    >>> z = np.random.default_rng(0).random((20, 30))
    >>> result = simulate(z, cell_size=100.0, duration=1e5, dt=1e4, uplift=1e-3,
    ...                   erodibility=1e-4, edges={"north": "closed", "south": "closed"},
    ...                   track=("west", "east"))
    >>> result.n_steps, result.divide.positions.shape
    (10, (11, 20))
    """
    duration_f = check_time_step(duration, "duration")
    dt_f = check_time_step(dt, "dt")
    m_f, n_f = check_exponents(m, n)
    d_f = check_diffusivity(diffusivity)
    start = _as_start(surface, cell_size)
    edge_conditions = resolve_edges(edges)
    grid = _Grid(start, edge_conditions)
    shape = start.shape
    rows, cols = shape
    valid = start.valid
    k_field = as_field(erodibility, shape, name="erodibility", unit="m^(1-2m)/yr", minimum=0.0, valid=valid)
    u_field = as_field(uplift, shape, name="uplift", unit="m/yr", valid=valid)
    runoff_field = None if runoff is None else as_field(runoff, shape, name="runoff", unit="relative runoff", minimum=0.0, valid=valid)
    breaks, snaps = _time_breaks(duration_f, snapshot_times)
    tracker = None
    if track is not None:
        try:
            side_a, side_b = track
        except (TypeError, ValueError) as exc:
            raise ParameterError(f"`track` must be two opposite edges such as ('west', 'east'); got {track!r}") from exc
        for side in (side_a, side_b):
            if side in edge_conditions and not edge_conditions[side].is_open:
                raise ParameterError(f"`track` side {side!r} is a closed edge; nothing drains off it")
        tracker = _Tracker(side_a, side_b, where=~grid.wall)
    interval = None if track_interval is None else check_time_step(track_interval, "track_interval")

    state = start  # its elevation array is the model state, updated in place
    z = state.elevation.ravel()
    z0_base = z[grid.base_idx].copy()
    cell_area = np.ascontiguousarray(start.cell_area, dtype=np.float64)
    active_weights = cell_area[grid.active_idx // cols]
    routing_buffer = np.empty(shape, dtype=np.float64) if grid.all_wall_idx.size else None
    diffusion = _Operator(grid.kind, start.dx, start.dy, cell_area, d_f) if d_f > 0 else None
    # Discharge proxy: runoff x cell area accumulated downstream (the same sum as
    # FlowGraph.weighted_area, with the per-cell weights computed once).
    runoff_weights = None
    if runoff_field is not None:
        runoff_weights = (np.broadcast_to(runoff_field, (rows * cols,)) * np.repeat(cell_area, cols)).reshape(shape)
        runoff_weights = np.where(valid, runoff_weights, 0.0)

    def set_base_level(t: float) -> None:
        target = np.full(grid.base_idx.size, np.inf)
        for e, pos in grid.edge_positions.items():
            target[pos] = np.minimum(target[pos], edge_conditions[e].base_level(t, z0_base[pos]))
        z[grid.base_idx] = np.where(np.isinf(target), z0_base, target)

    def mirror_walls() -> None:
        z[grid.wall_idx] = z[grid.wall_src]

    def route_now() -> FlowGraph:
        src = state.elevation
        if routing_buffer is not None:
            np.copyto(routing_buffer, src)
            routing_buffer.ravel()[grid.all_wall_idx] = _WALL_HEIGHT
            src = routing_buffer
        filled, n_raised = fill_depressions(src, valid, grid.fill_outlets)
        cond = Conditioned(surface=filled, outlets=grid.route_outlets, method="fill", filled_cells=n_raised)
        return route(state, conditioning=cond)

    def snapshot() -> Dem:
        return dataclasses.replace(state, elevation=state.elevation.copy(), meta=dict(state.meta))

    set_base_level(0.0)
    mirror_walls()
    kept: list[Dem] = []
    kept_times: list[float] = []
    if snaps and snaps[0] == 0.0:
        kept.append(snapshot())
        kept_times.append(0.0)

    budget_rows: list[tuple[float, float, float, float, float]] = []
    next_track = 0.0
    t = 0.0
    n_steps = 0
    for t_break in breaks:
        k_steps = max(1, math.ceil((t_break - t) / dt_f - 1e-9))
        h = (t_break - t) / k_steps
        for j in range(k_steps):
            t_end = t_break if j == k_steps - 1 else t + h
            h_step = t_end - t
            flow = route_now()
            if tracker is not None and (interval is None or t >= next_track - 1e-9 * max(1.0, t)):
                tracker.record(t, flow)
                if interval is not None:
                    next_track = (math.floor(t / interval + 1e-9) + 1) * interval
            drainage = flow.area.ravel() if runoff_weights is None else flow.accumulate(runoff_weights).ravel()
            before = z[grid.active_idx]
            set_base_level(t_end)
            uplifted, eroded = _spk.fluvial_step(
                z, flow.order, flow.receivers, flow.distance, drainage, grid.active_flat,
                cols, cell_area, k_field, u_field, m_f, n_f, h_step,
            )
            outflow = diffusion.step(z, h_step) if diffusion is not None else 0.0
            mirror_walls()
            storage = float(np.dot(active_weights, z[grid.active_idx] - before))
            budget_rows.append((t_end, float(uplifted), float(eroded), outflow, storage))
            t = t_end
            n_steps += 1
        if t in snaps:
            kept.append(snapshot())
            kept_times.append(t)
    if tracker is not None:
        tracker.record(t, route_now())

    b = np.asarray(budget_rows, dtype=np.float64).reshape(-1, 5)
    budget = MassBudget(times=b[:, 0], uplift_m3=b[:, 1], eroded_m3=b[:, 2], diffused_out_m3=b[:, 3], storage_m3=b[:, 4])
    parameters = {
        "duration_yr": duration_f,
        "dt_yr": dt_f,
        "m": m_f,
        "n": n_f,
        "diffusivity_m2_per_yr": d_f,
        "uplift_m_per_yr": float(u_field[0]) if u_field.size == 1 else "raster",
        "erodibility": float(k_field[0]) if k_field.size == 1 else "raster",
        "runoff": None if runoff_field is None else (float(runoff_field[0]) if runoff_field.size == 1 else "raster"),
        "edges": {e: (c.kind if not c.is_open else f"open ({c.mode})") for e, c in edge_conditions.items()},
        "track": None if track is None else list(track),
    }
    return SimulationResult(
        times=np.asarray(kept_times, dtype=np.float64),
        snapshots=tuple(kept),
        final=snapshot(),
        divide=None if tracker is None else tracker.result(),
        budget=budget,
        cell_kind=grid.kind,
        n_steps=n_steps,
        parameters=parameters,
    )
