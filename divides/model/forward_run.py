"""A forward run of the model from a real DEM between two sides, with its divide tracked.

The pieces the forecast (:mod:`divides.outlook`) and the assessment's forward-run
evidence share: the DEM block-averaged to a model grid, the sides re-resolved on it,
uplift that balances the present landscape, one run of :func:`divides.model.simulate`
with the divide's displacement measured by the area the sides exchange
(:func:`divides.model.tracking.exchange_displacement`), and
:func:`forward_shift`, the displacement over a fraction of the landscape's
response time with K unknown.

The model never imports the assessment: the sides come in as
:class:`divides.terrain.sides.Sides`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from affine import Affine
from scipy import ndimage

from divides.errors import ParameterError, SideError
from divides.io.dem import Dem
from divides.model.simulate import simulate
from divides.model.tracking import exchange_displacement
from divides.terrain.divide_lines import divide_between
from divides.terrain.routing import FlowGraph, route
from divides.terrain.sides import Sides, SideSpec, resolve_sides

__all__ = [
    "FORWARD_HORIZON_TAU",
    "MAX_CELLS",
    "MIN_STEPS",
    "ForecastRun",
    "RunSetup",
    "SteadyBalance",
    "balance_uplift",
    "channel_cells",
    "time_steps",
    "block_mean",
    "coarsen",
    "ForwardShift",
    "SideGround",
    "forward_shift",
    "laplacian",
    "prepare",
    "run_model",
    "slopes",
    "steady_balance",
]

#: Larger DEMs are block-averaged to at most this many cells along each side.
MAX_CELLS = 300

#: Fewest time steps of a run.
MIN_STEPS = 20
_TRACK_INTERVALS = 10

#: Horizon of the forward-run evidence, in response times (the benchmark's truth window; docs/validation.md).
FORWARD_HORIZON_TAU = 0.3


@dataclass(frozen=True, eq=False)
class ForecastRun:
    """One model run of a forecast.

    Attributes
    ----------
    label : str
        ``"central"`` or ``"member k"``.
    theta, m, n : float
        Concavity and the exponents of E = K A^m S^n (m = θ n).
    erodibility : (float, float)
        K on side a and side b, in m^(1-2m)/yr (equal unless both sides' erosion rates were given).
    uplift : (float, float)
        Uplift rate U (m/yr) applied on side a and side b.
    times : ndarray
        Years since the start at which the divide was measured.
    displacement_m : ndarray
        Mean displacement of the divide since the start (m), positive into side b.
    area_a_m2 : ndarray
        Area of side a through time.
    final : Dem
        The surface at the end of the run (model grid).
    mask_a, mask_b : ndarray of bool
        The sides at the end.
    lines : list of DivideLine
        The divide at the end.
    n_steps : int
    dt : float
        Time step (years).
    courant : float
        Knickpoint celerity × dt / cell size at the reference drainage area.
    diffusivity : float
        Hillslope diffusivity D (m²/yr).
    captured : bool
        A side's outlet came to drain through the other side during the run.
    """

    label: str
    theta: float
    m: float
    n: float
    erodibility: tuple[float, float]
    uplift: tuple[float, float]
    times: np.ndarray
    displacement_m: np.ndarray
    area_a_m2: np.ndarray
    final: Dem
    mask_a: np.ndarray
    mask_b: np.ndarray
    lines: list
    n_steps: int
    dt: float
    courant: float
    diffusivity: float = 0.0
    captured: bool = False

    def summary(self) -> dict:
        """JSON-ready figures of the run."""
        return {
            "label": self.label,
            "theta": self.theta,
            "m": self.m,
            "n": self.n,
            "erodibility": {"a": self.erodibility[0], "b": self.erodibility[1]},
            "uplift_m_per_yr": {"a": self.uplift[0], "b": self.uplift[1]},
            "diffusivity_m2_per_yr": self.diffusivity,
            "displacement_m": float(self.displacement_m[-1]) if np.isfinite(self.displacement_m[-1]) else None,
            "n_steps": self.n_steps,
            "dt_yr": self.dt,
            "courant": self.courant,
            "captured": self.captured,
        }






def coarsen(dem: Dem, *, max_cells: int = MAX_CELLS, block: int | None = None) -> tuple[Dem, int]:
    """Block-average a DEM so that neither side exceeds ``max_cells`` cells (or by ``block`` cells a side, when given).

    Parameters
    ----------
    dem : Dem
    max_cells : int
        Largest number of cells along either side of the result.
    block : int, optional
        Cells of the DEM per cell of the result along a side, instead (a whole number >= 1).

    Returns
    -------
    (Dem, int)
        The averaged DEM and the block size (1 and ``dem`` itself when it is small enough).
        The last rows and columns are padded by repeating the edge to fill whole
        blocks; a block is valid when at least half its cells are.

    Examples
    --------
    >>> import numpy as np
    >>> small, f = coarsen(Dem.from_array(np.arange(36.0).reshape(6, 6), cell_size=10.0), max_cells=3)
    >>> f, small.shape, float(small.dx[0]), float(small.elevation[0, 0])
    (2, (3, 3), 20.0, 3.5)
    """
    if not isinstance(max_cells, (int, np.integer)) or isinstance(max_cells, bool) or max_cells < 3:
        raise ParameterError(f"`max_cells` must be a whole number >= 3; got {max_cells!r}")
    if block is not None and (not isinstance(block, (int, np.integer)) or isinstance(block, bool) or block < 1):
        raise ParameterError(f"`block` must be a whole number >= 1; got {block!r}")
    rows, cols = dem.shape
    f = max(1, math.ceil(max(rows, cols) / max_cells)) if block is None else int(block)
    if f == 1:
        return dem, 1
    out = block_mean(dem.elevation, f, valid=dem.valid)
    transform = dem.transform @ Affine.scale(f)
    if dem.crs is None:
        cell = (float(np.median(dem.dx)) * f, float(np.median(dem.dy)) * f)
        small = Dem.from_array(out, cell_size=cell, transform=transform, valid_range=None, path=dem.path)
    else:
        small = Dem.from_array(out, transform=transform, crs=dem.crs, valid_range=None, path=dem.path)
    return small, f


#: Cells of the grid :func:`block_mean` reads at a time (whole rows of blocks).
BLOCK_MEAN_CELLS = 1 << 22


def block_mean(z: np.ndarray, f: int, valid: np.ndarray | None = None) -> np.ndarray:
    """Mean of each f x f block of ``z`` (edges padded by repetition); NaN where fewer than half are finite.

    ``valid`` (optional, the shape of ``z``): cells outside it count as NaN. The grid is read a few rows of blocks
    at a time, so a DEM of 10^8 cells needs no grid-sized copies (each block's mean is the same).
    """
    z = np.asarray(z)
    if f == 1:
        z = np.asarray(z, dtype=np.float64)
        return z.copy() if valid is None else np.where(valid, z, np.nan)
    rows, cols = z.shape
    nr, nc = math.ceil(rows / f), math.ceil(cols / f)
    out = np.full((nr, nc), np.nan)
    step = max(1, BLOCK_MEAN_CELLS // (f * f * nc))  # rows of blocks at a time
    for b0 in range(0, nr, step):
        b1 = min(nr, b0 + step)
        part = np.asarray(z[b0 * f: b1 * f], dtype=np.float64)
        if valid is not None:
            part = np.where(valid[b0 * f: b1 * f], part, np.nan)
        blocks = np.pad(part, ((0, (b1 - b0) * f - part.shape[0]), (0, nc * f - cols)),
                        mode="edge").reshape(b1 - b0, f, nc, f)
        ok = np.isfinite(blocks)
        count = ok.sum(axis=(1, 3))
        total = np.where(ok, blocks, 0.0).sum(axis=(1, 3))
        keep = 2 * count >= f * f
        out[b0:b1][keep] = total[keep] / count[keep]
    return out


def _side_masks(flow: FlowGraph, start_a: np.ndarray, start_b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each side now: the basins (by outlet) whose outlet was that side's at the start, and those whose
    outlet was neither side's but most of whose cells came from the two sides, to the one that gave more.

    A channel's mouth on a held edge can shift along the edge as the surface evolves, onto a cell that
    was a basin of its own at the start: the side must follow it rather than collapse onto the old
    mouth cell (seeds alone would keep only what still drains through that cell).
    """
    labels = flow.basins().ravel()
    size = int(labels.max()) + 1
    count = np.bincount(labels, minlength=size).astype(np.float64)
    from_a = np.bincount(labels, weights=start_a.ravel().astype(np.float64), minlength=size)
    from_b = np.bincount(labels, weights=start_b.ravel().astype(np.float64), minlength=size)
    outlet = np.zeros(size, dtype=np.int64)
    outlet[labels[flow.outlets]] = flow.outlets
    mouth_a, mouth_b = start_a.ravel()[outlet], start_b.ravel()[outlet]
    mostly_sides = 2.0 * (from_a + from_b) > count
    is_a = mouth_a | (~mouth_b & mostly_sides & (from_a > from_b))
    is_b = mouth_b | (~mouth_a & mostly_sides & (from_b > from_a))
    is_a[0] = is_b[0] = False  # label 0: invalid cells belong to no side
    return is_a[labels].reshape(flow.shape), is_b[labels].reshape(flow.shape)


def _model_specs(sides: Sides, factor: int, grid: Dem) -> tuple[SideSpec, SideSpec, float]:
    """Side SPECs on the model grid: edges as given, points at their snapped cells."""
    specs = []
    for side in (sides.a, sides.b):
        if side.spec.edge is not None:
            specs.append(side.spec)
        else:
            pts = tuple((s["x_snapped"], s["y_snapped"]) for s in side.snapped)
            specs.append(SideSpec(text=side.spec.text, points=pts, lonlat=False))
    # On the DEM's own grid a snapped cell is kept exactly; on a coarser one it
    # moves to the largest-area cell within one and a half model cells.
    radius = 0.0 if factor == 1 else 1.5 * float(max(np.max(grid.dx), np.max(grid.dy)))
    return specs[0], specs[1], radius


def _nearest_side(mask_a: np.ndarray, mask_b: np.ndarray) -> np.ndarray:
    """True where the nearest cell of either side belongs to side a (fields split by side)."""
    either = mask_a | mask_b
    if either.all():
        return mask_a.copy()
    _, (ri, ci) = ndimage.distance_transform_edt(~either, return_indices=True)
    return mask_a[ri, ci]



@dataclass(frozen=True, eq=False)
class RunSetup:
    """Everything a run shares: the grid, the sides, the edges and the reference channels."""

    grid: Dem
    flow: FlowGraph
    seeds_a: np.ndarray
    seeds_b: np.ndarray
    mask_a: np.ndarray
    mask_b: np.ndarray
    region_a: np.ndarray
    edges: dict
    closed: tuple
    channel_area_m2: float
    length_m: float
    present: list


def slopes(flow: FlowGraph) -> np.ndarray:
    """Gradient to the receiver on the conditioned surface (0 at outlets), flat."""
    z = np.asarray(flow.conditioned.surface, dtype=np.float64).ravel()
    dist = np.asarray(flow.distance, dtype=np.float64).ravel()
    drop = z - z[flow.receivers]
    out = np.zeros(z.size)
    ok = (dist > 0) & np.isfinite(drop)
    out[ok] = drop[ok] / dist[ok]
    return out


def _channel_cells(setup: RunSetup, mask: np.ndarray) -> np.ndarray:
    """Flat indices of a side's channel cells on the model grid (at least three)."""
    return channel_cells(setup.flow, mask, setup.channel_area_m2)


def channel_cells(flow: FlowGraph, mask: np.ndarray, channel_area_m2: float) -> np.ndarray:
    """Flat indices of the channel cells of ``mask`` that drain downhill (at least three: the largest
    tenth of the mask's draining cells when too few reach ``channel_area_m2``)."""
    area = flow.area.ravel()
    slope = slopes(flow)
    side = np.asarray(mask, dtype=bool).ravel() & (slope > 0)
    cells = np.flatnonzero(side & (area >= channel_area_m2))
    if cells.size < 3:  # grid too coarse for the threshold: the side's largest tenth
        cand = np.flatnonzero(side)
        if cand.size == 0:
            return cand
        cells = cand[area[cand] >= np.quantile(area[cand], 0.9)]
    return cells


def balance_uplift(setup: RunSetup, k_field: np.ndarray, m: float, n: float) -> tuple[float, float, float, float]:
    """Median erosion rate K A^m S^n of each side's channels on the model grid, their median slope and area."""
    area = setup.flow.area.ravel()
    slope = slopes(setup.flow)
    k_flat = np.broadcast_to(k_field, setup.grid.shape).ravel()
    rates, side_slopes = [], []
    for mask in (setup.mask_a, setup.mask_b):
        cells = _channel_cells(setup, mask)
        if cells.size == 0:
            raise SideError("a side has no cell that drains downhill on the model grid; choose larger sides")
        rates.append(float(np.median(k_flat[cells] * area[cells] ** m * slope[cells] ** n)))
        side_slopes.append(slope[cells])
    return rates[0], rates[1], float(np.median(np.concatenate(side_slopes))), setup.channel_area_m2


def time_steps(grid: Dem, years: float, *, k: float, m: float, n: float, a_ref: float, s_ref: float,
               max_steps: int) -> tuple[float, float, int, float]:
    """Cell size, knickpoint celerity, number of steps and step (years) of a run.

    A knickpoint at the reference drainage area ``a_ref`` and slope ``s_ref`` crosses about one cell
    per step (celerity n K A^m S^(n-1); Royden & Perron 2013), within [MIN_STEPS, max_steps] steps.
    """
    cell = float(min(np.min(grid.dx), np.min(grid.dy)))
    celerity = n * k * a_ref ** m * max(s_ref, 1e-12) ** (n - 1.0)
    n_steps = int(min(max(math.ceil(years * celerity / cell - 1e-9), MIN_STEPS), max_steps))
    return cell, celerity, n_steps, years / n_steps


def laplacian(grid: Dem) -> np.ndarray:
    """∇²z (1/m) of the surface on the 5-point stencil, per-row cell sizes; NaN on the grid's edge and next to
    invalid cells (the stencil of the model's diffusion, :func:`divides.model.diffusion.diffusion_step`).

    Examples
    --------
    >>> x = np.arange(5.0) * 10.0
    >>> z = -0.01 * (x[None, :] - 20.0) ** 2 + np.zeros((5, 1))  # a parabolic ridge: ∇²z = -0.02 / m
    >>> round(float(laplacian(Dem.from_array(z, cell_size=10.0))[2, 2]), 6)
    -0.02
    """
    z = np.where(grid.valid, grid.elevation, np.nan).astype(np.float64)
    dx, dy = np.asarray(grid.dx, dtype=np.float64), np.asarray(grid.dy, dtype=np.float64)
    out = np.full(z.shape, np.nan)
    c = z[1:-1, 1:-1]
    out[1:-1, 1:-1] = ((z[1:-1, 2:] + z[1:-1, :-2] - 2.0 * c) / dx[1:-1, None] ** 2
                       + (z[2:, 1:-1] + z[:-2, 1:-1] - 2.0 * c) / dy[1:-1, None] ** 2)
    return out


@dataclass(frozen=True)
class SteadyBalance:
    """Uplift and diffusivity that hold the present surface in the model's steady state.

    Attributes
    ----------
    uplift : (float, float)
        U (m/yr) of side a and side b (equal unless balanced per side).
    diffusivity : float
        D (m²/yr): the one given, or the least-squares one (``fitted``).
    fitted : bool
        D was fitted from the surface.
    cells : int
        Cells of both sides the balance was taken over.
    """

    uplift: tuple[float, float]
    diffusivity: float
    fitted: bool
    cells: int


#: Fewest cells a steady balance is fitted over (below: D = 0 and U the mean fluvial erosion).
_MIN_BALANCE_CELLS = 20


def steady_balance(setup: RunSetup, k_field: np.ndarray | float, m: float, n: float, *,
                   diffusivity: float | None = None, by_side: bool = False,
                   uplift: np.ndarray | None = None) -> SteadyBalance:
    """Uplift U and diffusivity D for which the present surface is a steady state of the model.

    At steady state every cell of the stream-power and linear-diffusion model obeys
    U = K A^m S^n − D ∇²z (Perron, Kirchner & Dietrich 2009, Nature 460; the hillslope half is the
    hilltop balance E = −D ∇²z of Roering et al. 2007, EPSL 264). Over the cells of both sides (with
    a slope to their receiver and a full stencil) the fluvial term K A^m S^n is regressed on ∇²z by
    least squares: the intercept is U (one for the whole landscape, or one per side with
    ``by_side``), the slope D. Both scale with K, so the run's time still scales as 1/K.

    Parameters
    ----------
    setup : RunSetup
    k_field : float or ndarray
        Erodibility K (a number or a field of the model grid's shape).
    m, n : float
        Exponents of E = K A^m S^n.
    diffusivity : float, optional
        D given (m²/yr): only U is fitted. Default: D fitted too (clipped at 0, U then refitted).
    by_side : bool
        One U per side (a shared D).
    uplift : ndarray, optional
        An uplift raster given (m/yr): only D is fitted (if not given), and U of each side is the
        median of the raster over it.

    Returns
    -------
    SteadyBalance
        U below 0 is returned as 0 (a surface lowering everywhere has no uplift to balance it).
    """
    area = np.asarray(setup.flow.area, dtype=np.float64).ravel()
    slope = slopes(setup.flow)
    k_flat = np.broadcast_to(np.asarray(k_field, dtype=np.float64), setup.grid.shape).ravel()
    lap = laplacian(setup.grid).ravel()
    code = np.where(setup.mask_a.ravel(), 0, np.where(setup.mask_b.ravel(), 1, -1))
    sel = (code >= 0) & (slope > 0) & np.isfinite(lap)
    fluvial = k_flat[sel] * area[sel] ** m * slope[sel] ** n
    curv, side = lap[sel], code[sel]
    if uplift is not None:
        u_cells = np.asarray(uplift, dtype=np.float64).ravel()[sel]
        u_sides = tuple(float(np.median(uplift[mask])) for mask in (setup.mask_a, setup.mask_b))
        d = diffusivity
        if d is None:  # through the origin: K A^m S^n − U = D ∇²z
            denom = float(np.sum(curv * curv))
            d = max(float(np.sum(curv * (fluvial - u_cells))) / denom, 0.0) if denom > 0 and sel.sum() >= \
                _MIN_BALANCE_CELLS else 0.0
        return SteadyBalance(u_sides, float(d), diffusivity is None, int(sel.sum()))
    groups = (side == 0, side == 1) if by_side else (np.ones(side.size, dtype=bool),)
    design = np.column_stack([g.astype(np.float64) for g in groups])
    fitted = diffusivity is None
    d = 0.0 if diffusivity is None else float(diffusivity)
    if fitted and sel.sum() >= _MIN_BALANCE_CELLS and all(g.any() for g in groups):
        coef, *_ = np.linalg.lstsq(np.column_stack([design, curv]), fluvial, rcond=None)
        d = max(float(coef[-1]), 0.0)
    target = fluvial - d * curv
    u = [float(np.mean(target[g])) if g.any() else float(np.mean(target)) if target.size else 0.0 for g in groups]
    u_a, u_b = (u[0], u[1]) if by_side else (u[0], u[0])
    return SteadyBalance((max(u_a, 0.0), max(u_b, 0.0)), d, fitted, int(sel.sum()))


def run_model(setup: RunSetup, *, label: str, theta: float, n: float, k: tuple[float, float], years: float,
              uplift_mode: str | np.ndarray, diffusivity: float | None, max_steps: int, balance: str = "channels",
              diffusivity_factor: float = 1.0) -> ForecastRun:
    """One run from the model grid's surface, with the divide between the sides tracked.

    ``balance="channels"``: uplift balances the median channel erosion of the sides
    (:func:`balance_uplift`) and ``diffusivity`` is used as given. ``balance="steady"``: uplift
    (and D when ``diffusivity`` is None) hold the present surface in the model's steady state
    (:func:`steady_balance`); a fitted D is multiplied by ``diffusivity_factor`` and U refitted at it.
    """
    if balance not in ("channels", "steady"):
        raise ParameterError(f"`balance` must be 'channels' or 'steady'; got {balance!r}")
    if diffusivity is None and balance != "steady":
        raise ParameterError("a diffusivity fitted from the surface needs balance='steady'")
    m = theta * n
    k_field: Any = k[0] if k[0] == k[1] else np.where(setup.region_a, k[0], k[1])
    u_a, u_b, s_ref, a_ref = balance_uplift(setup, np.asarray(k_field, dtype=np.float64), m, n)
    raster = uplift_mode if isinstance(uplift_mode, np.ndarray) else None
    if balance == "steady":
        kw = dict(by_side=uplift_mode == "sides" if raster is None else False, uplift=raster)
        fit = steady_balance(setup, k_field, m, n, diffusivity=diffusivity, **kw)
        diffusivity = fit.diffusivity
        if fit.fitted and diffusivity_factor != 1.0:
            diffusivity *= float(diffusivity_factor)
            fit = steady_balance(setup, k_field, m, n, diffusivity=diffusivity, **kw)
        u_a, u_b = fit.uplift
    if raster is not None:  # a raster given: used as is
        u_field: Any = raster
        u_a, u_b = (float(np.median(raster[mask])) for mask in (setup.mask_a, setup.mask_b))
    elif uplift_mode == "uniform":
        u_a = u_b = 0.5 * (u_a + u_b)
        u_field = u_a
    else:
        u_field = np.where(setup.region_a, u_a, u_b)
    cell, celerity, n_steps, dt = time_steps(setup.grid, years, k=max(k), m=m, n=n, a_ref=a_ref, s_ref=s_ref,
                                             max_steps=max_steps)
    times = np.linspace(0.0, years, min(_TRACK_INTERVALS, n_steps) + 1)
    result = simulate(setup.grid, duration=years, dt=dt, uplift=u_field, erodibility=k_field, m=m, n=n,
                      diffusivity=diffusivity, edges=setup.edges, snapshot_times=times)
    disp, areas = [], []
    cell_area = setup.grid.cell_area_grid()
    captured = False
    for i, snap in enumerate(result.snapshots):
        mask_a, mask_b = (setup.mask_a, setup.mask_b) if i == 0 else \
            _side_masks(route(snap, closed_edges=setup.closed), setup.mask_a, setup.mask_b)
        # one side's outlet now drains through the other: a capture
        captured = captured or bool(mask_b.ravel()[setup.seeds_a].any() or mask_a.ravel()[setup.seeds_b].any())
        disp.append(exchange_displacement(cell_area, (setup.mask_a, setup.mask_b), (mask_a, mask_b), setup.present))
        areas.append(float(np.sum(cell_area[mask_a])))
    try:
        lines = divide_between(result.final, mask_a, mask_b).lines
    except SideError:  # the sides no longer touch
        lines = []
    return ForecastRun(
        label=label, theta=theta, m=m, n=n, erodibility=(float(k[0]), float(k[1])), uplift=(u_a, u_b),
        times=np.asarray(result.times), displacement_m=np.asarray(disp), area_a_m2=np.asarray(areas),
        final=result.final, mask_a=mask_a, mask_b=mask_b,
        lines=lines, n_steps=result.n_steps, dt=dt, courant=celerity * dt / cell, diffusivity=diffusivity,
        captured=captured,
    )


def prepare(grid: Dem, sides: Sides, *, factor: int, closed_edges: tuple[str, ...],
            channel_area_m2: float) -> RunSetup:
    """Everything the runs on a model grid share.

    Parameters
    ----------
    grid : Dem
        The model grid (:func:`coarsen` of the DEM).
    sides : Sides
        The two sides resolved on the DEM itself (points are re-snapped on the model grid).
    factor : int
        Block size of ``grid`` over the DEM (1: the DEM itself).
    closed_edges : tuple of str
        DEM edges that no water leaves.
    channel_area_m2 : float
        Channel threshold of the DEM (the reference channels are at least two model cells).

    Returns
    -------
    RunSetup
    """
    closed = tuple(closed_edges)
    flow = route(grid, closed_edges=closed)
    spec_a, spec_b, radius = _model_specs(sides, factor, grid)
    on_grid = resolve_sides(flow, spec_a, spec_b, snap_radius_m=radius)
    mask_a, mask_b = on_grid.a.mask, on_grid.b.mask
    divide = divide_between(grid, mask_a, mask_b)
    if not divide.lines:
        raise SideError("on the model grid the two sides touch only at isolated cells: no divide to run the model on")
    return RunSetup(
        grid=grid, flow=flow, seeds_a=on_grid.a.seeds, seeds_b=on_grid.b.seeds, mask_a=mask_a, mask_b=mask_b,
        region_a=_nearest_side(mask_a, mask_b), edges={e: "closed" for e in closed}, closed=closed,
        channel_area_m2=max(float(channel_area_m2), 2.0 * float(np.max(grid.cell_area))),
        length_m=divide.length_m, present=divide.lines,
    )


@dataclass(frozen=True, eq=False)
class SideGround:
    """Drainage area, slope and curvature of one side's cells on the model grid (what its A^m S^n and its
    steady balance are made of).

    Attributes
    ----------
    log_area, log_slope : ndarray
        ln A (m²) and ln S of every cell of the side (ln S = −inf where the cell has no slope).
    curvature : ndarray
        ∇²z (1/m) of every cell (:func:`laplacian`; NaN on the grid's edge): with the cells that have a
        slope, what the steady balance (:func:`steady_balance`) is fitted over.
    """

    log_area: np.ndarray
    log_slope: np.ndarray
    curvature: np.ndarray


#: Exponent draws evaluated at once (bounds the temporary arrays to about 32 x the model grid).
_DRAW_CHUNK = 32


def _exponents(theta: np.ndarray | float, n: np.ndarray | float) -> tuple[np.ndarray, np.ndarray]:
    """m = θ n and n as 1-d arrays of the same length."""
    th, nn = np.broadcast_arrays(np.atleast_1d(np.asarray(theta, dtype=np.float64)),
                                 np.atleast_1d(np.asarray(n, dtype=np.float64)))
    return (th * nn).ravel(), nn.ravel()


def _powers(log_area: np.ndarray, log_slope: np.ndarray, m: np.ndarray, n: np.ndarray,
            curvature: np.ndarray | None = None) -> np.ndarray:
    """For each pair of exponents (m_i, n_i), the mean of A^m S^n over the cells, or with ``curvature`` (∇²z of
    the same cells, all with a slope) the uplift of the steady balance at K = 1 over them: the least-squares
    intercept of A^m S^n on ∇²z, its slope D clipped at 0 (:func:`steady_balance`, one U for both sides)."""
    out = np.empty(m.size)
    if curvature is not None:
        if curvature.size == 0:
            return np.zeros(m.size)
        centred = curvature - np.mean(curvature)
        spread = float(np.sum(centred * centred))
        fit_d = curvature.size >= _MIN_BALANCE_CELLS and spread > 0
    for s in range(0, m.size, _DRAW_CHUNK):
        log_p = m[s:s + _DRAW_CHUNK, None] * log_area[None, :] + n[s:s + _DRAW_CHUNK, None] * log_slope[None, :]
        power = np.exp(log_p)  # n > 0: a cell without slope (ln S = −inf) has power 0
        out[s:s + _DRAW_CHUNK] = np.mean(power, axis=1)
        if curvature is not None and fit_d:  # U = mean(A^m S^n) − D mean(∇²z), D = cov / var
            d = np.maximum(power @ centred / spread, 0.0)
            out[s:s + _DRAW_CHUNK] -= d * float(np.mean(curvature))
    return out if curvature is None else np.maximum(out, 0.0)


@dataclass(frozen=True, eq=False)
class ForwardShift:
    """The divide's shift in a short forward run with K = 1, and what turns it into a rate.

    Attributes
    ----------
    shift_cells : float
        Mean displacement of the divide over the horizon in model cells, positive into side b.
    cell_m : float
        Model cell size (m).
    years_unit_k : float
        The horizon in years for K = 1 (SI units). Time scales as 1/K (uplift and diffusivity of the steady
        balance both scale with K, so dz/dt = K (c + d ∇²z − A^m S^n)), so for a landscape of erodibility K
        the horizon is ``years_unit_k / K`` and the divide moves at ``K * shift_cells * cell_m / years_unit_k``
        m/yr.
    power_a, power_b : float
        Mean of A^m S^n over each side's cells of the model grid at the start: a side's
        basin-averaged erosion rate E gives K = E / power.
    theta, n : float
        Exponents of the run (m = θ n); NaN when not recorded.
    ground : (SideGround, SideGround) or None
        Each side's cells on the model grid, to evaluate A^m S^n and the steady balance at other exponents
        (:meth:`side_powers`, :meth:`balance_power`); None when not recorded.
    reference : (float, float) or None
        Drainage area (m²) and slope of the run's reference channel: the channel threshold and the
        median slope of both sides' reference channels (the ones the time step is set at).
    """

    shift_cells: float
    cell_m: float
    years_unit_k: float
    power_a: float
    power_b: float
    theta: float = math.nan
    n: float = math.nan
    ground: tuple[SideGround, SideGround] | None = None
    reference: tuple[float, float] | None = None

    @property
    def carries_exponents(self) -> bool:
        """True when A^m S^n can be re-evaluated at other exponents."""
        return self.ground is not None and self.reference is not None and math.isfinite(self.theta * self.n)

    def side_powers(self, theta: np.ndarray | float, n: np.ndarray | float) -> tuple[np.ndarray, np.ndarray]:
        """Mean of A^m S^n over each side's cells at exponents (θ_i, n_i) (``power_a``/``power_b`` at the run's)."""
        self._need_ground()
        m, nn = _exponents(theta, n)
        a, b = (_powers(g.log_area, g.log_slope, m, nn) for g in self.ground)
        return a, b

    def balance_power(self, theta: np.ndarray | float, n: np.ndarray | float) -> np.ndarray:
        """The run's uplift at K = 1 at exponents (θ_i, n_i): the steady balance over both sides' cells with a
        slope and a full stencil (:func:`steady_balance`); it sets the run's time scale, relief / U."""
        self._need_ground()
        m, nn = _exponents(theta, n)
        cells = [np.isfinite(g.log_slope) & np.isfinite(g.curvature) for g in self.ground]
        pick = [np.concatenate([getattr(g, k)[c] for g, c in zip(self.ground, cells)])
                for k in ("log_area", "log_slope", "curvature")]
        return _powers(pick[0], pick[1], m, nn, pick[2])

    def reference_power(self, theta: np.ndarray | float, n: np.ndarray | float) -> np.ndarray:
        """A^m S^n of the reference channel at exponents (θ_i, n_i)."""
        self._need_ground()
        area, slope = self.reference
        m, nn = _exponents(theta, n)
        return area**m * slope**nn

    def _need_ground(self) -> None:
        if not self.carries_exponents:
            raise ParameterError("this forward shift was made without its model grid's ground; "
                                 "A^m S^n cannot be re-evaluated at other exponents")

    def rate_m_per_yr(self, k: np.ndarray | float, theta: np.ndarray | float | None = None,
                      n: np.ndarray | float | None = None) -> np.ndarray:
        """Rate of the divide's motion (m/yr, positive into b) for erodibility ``k``.

        With exponents (θ_i, n_i) drawn, ``k`` is the erodibility at them (one per draw): the run's shift
        over its horizon in response times is kept (to first order it does not depend on the exponents)
        while its time scale, relief / U, follows the balancing uplift U at those exponents
        (:meth:`balance_power`).
        """
        rate = np.asarray(k, dtype=np.float64) * self.shift_cells * self.cell_m / self.years_unit_k
        if theta is None and n is None:
            return rate
        th = self.theta if theta is None else theta
        nn = self.n if n is None else n
        return rate * self.balance_power(th, nn) / self.balance_power(self.theta, self.n)


def forward_shift(dem: Dem, sides: Sides, *, theta: float, n: float, closed_edges: tuple[str, ...],
                  channel_area_m2: float, horizon_tau: float = FORWARD_HORIZON_TAU,
                  max_steps: int = 60) -> ForwardShift:
    """Evidence from a short forward run: the divide's shift over a fraction of the response time, in cells.

    One run of the forward model from the DEM with K unknown: K = 1 is used, and uplift U and
    diffusivity D are those that hold the present surface in the model's steady state
    (:func:`steady_balance`: U = K A^m S^n − D ∇²z by least squares over both sides' cells;
    Perron, Kirchner & Dietrich 2009), one U for the whole landscape. A lopsided steady divide then
    stays put while a transient, which no single U and D balance, moves it. U and D scale with K,
    so dz/dt = K (c + d ∇²z − A^m S^n) and time scales as 1/K whatever n: the shift over a horizon
    given in response times does not depend on K (Royden & Perron 2013: K only rescales time).
    The response time is relief / U (the landscape's relief over the run's uplift; Whipple 2001),
    the horizon ``horizon_tau`` of it.

    Parameters
    ----------
    dem : Dem
    sides : Sides
        The two sides resolved on ``dem``.
    theta, n : float
        Concavity and slope exponent (m = θ n).
    closed_edges : tuple of str
    channel_area_m2 : float
        Channel threshold (m²).
    horizon_tau : float
        Horizon in response times.
    max_steps : int
        Most time steps (>= 20): the run is a cheap line of evidence, not a forecast.

    Returns
    -------
    ForwardShift
        The shift in model cells (positive into side b; 0 when the landscape has no relief to
        erode or nothing to balance, NaN when the divide left the grid) and what turns it into a rate.
    """
    grid, factor = coarsen(dem)
    setup = prepare(grid, sides, factor=factor, closed_edges=closed_edges, channel_area_m2=channel_area_m2)
    m = theta * n
    with np.errstate(divide="ignore", invalid="ignore"):  # ln 0 = −inf: a cell without slope has A^m S^n = 0
        log_area = np.log(np.asarray(setup.flow.area, dtype=np.float64).ravel())
        log_slope = np.log(slopes(setup.flow))
    curvature = laplacian(grid).ravel()
    ground = tuple(SideGround(log_area[mask.ravel()], log_slope[mask.ravel()], curvature[mask.ravel()])
                   for mask in (setup.mask_a, setup.mask_b))
    power_a, power_b = (float(_powers(g.log_area, g.log_slope, np.array([m]), np.array([float(n)]))[0])
                        for g in ground)
    cell = float(min(np.min(grid.dx), np.min(grid.dy)))
    _, _, s_ref, a_ref = balance_uplift(setup, np.asarray(1.0), m, n)
    recorded = {"theta": float(theta), "n": float(n), "ground": ground, "reference": (a_ref, s_ref)}
    z = np.where(setup.mask_a | setup.mask_b, grid.elevation, np.nan)
    relief = float(np.nanmax(z) - np.nanmin(z))
    uplift = steady_balance(setup, 1.0, m, n).uplift[0]
    if not (relief > 0 and uplift > 0):
        return ForwardShift(0.0, cell, math.inf, power_a, power_b, **recorded)
    years = horizon_tau * relief / uplift
    run = run_model(setup, label="evidence", theta=theta, n=n, k=(1.0, 1.0), years=years, uplift_mode="uniform",
                    diffusivity=None, max_steps=int(max_steps), balance="steady")
    return ForwardShift(float(run.displacement_m[-1]) / cell, cell, years, power_a, power_b, **recorded)
