"""One forward run of a whole DEM, and how far each piece of its divides moves in it.

Screening's line of evidence beside the near-divide contrasts: the DEM block-averaged to
the model grid (:func:`divides.model.forward_run.coarsen`), one run of
:func:`divides.model.simulate` with K unknown (K = 1) and an uplift balancing the present
landscape (the median K A^m S^n of its channels, or U and D of its steady balance,
:func:`steady_uplift`), over
:data:`divides.model.forward_run.FORWARD_HORIZON_TAU` response times (relief / U), as the
single-divide forward run (:func:`divides.model.forward_run.forward_shift`) does between two
sides. The outlet basins of the start are matched to those of the end
(:func:`divides.model.outlet_exchange.match_labels`), and a piece of divide between two of
them moves by the area they exchanged next to it over its length
(:func:`divides.model.tracking.exchange_displacement`), in model cells.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np
from scipy import ndimage

from divides.errors import ParameterError
from divides.io.dem import Dem
from divides.model.forward_run import FORWARD_HORIZON_TAU, channel_cells, coarsen, laplacian, slopes, time_steps
from divides.model.outlet_exchange import match_labels, outlet_basins
from divides.model.simulate import simulate
from divides.model.tracking import exchange_displacement
from divides.terrain.divide_lines import DivideLine
from divides.terrain.routing import route

__all__ = ["LandscapeShift", "landscape_shift", "landscape_shifts", "ModelStart", "model_start", "run_from",
           "steady_uplift", "local_uplift", "balance_terms", "BALANCES", "MIN_BALANCE_CELLS", "PIECE_RADIUS_CELLS"]

#: Model cells on either side of a piece of divide whose exchange counts as its motion: several times
#: the shift of a divide moving 2 cells per response time over the horizon (0.6 cell), so that the area it
#: exchanges is inside, while most of a neighbouring piece's is not (set before any fit).
PIECE_RADIUS_CELLS = 3


@dataclass(frozen=True, eq=False)
class LandscapeShift:
    """A forward run of a whole DEM on its model grid: outlet basins at the start and at the end.

    Attributes
    ----------
    grid : Dem
        The model grid (the DEM block-averaged by ``factor``).
    factor : int
        Block size of the model grid over the DEM.
    before, after : ndarray of int32, model-grid shape
        Outlet basins at the start and at the end of the run (0: none).
    match : ndarray of int
        For every label of ``before`` (index), the label of ``after`` covering most of it.
    years_unit_k : float
        The horizon in years at K = 1 (inf when the landscape has no relief to erode).
    n_steps : int
        Time steps of the run (0 when it was not run).
    """

    grid: Dem
    factor: int
    before: np.ndarray
    after: np.ndarray
    match: np.ndarray
    years_unit_k: float
    n_steps: int

    @cached_property
    def _cell_area(self) -> np.ndarray:
        return self.grid.cell_area_grid()

    @property
    def cell_m(self) -> float:
        """Model cell size (m)."""
        return float(min(np.min(self.grid.dx), np.min(self.grid.dy)))

    def on_model_grid(self, labels: np.ndarray) -> np.ndarray:
        """A label raster of the DEM read at the centre cell of every block of the model grid."""
        f = self.factor
        labels = np.asarray(labels)
        if f == 1:
            return labels
        rows, cols = self.grid.shape
        r = np.minimum(np.arange(rows) * f + f // 2, labels.shape[0] - 1)
        c = np.minimum(np.arange(cols) * f + f // 2, labels.shape[1] - 1)
        return labels[np.ix_(r, c)]

    def piece_shift(self, line: DivideLine, sides: np.ndarray, label_a: int, label_b: int,
                    radius_cells: int = PIECE_RADIUS_CELLS) -> float:
        """Shift of one piece of divide over the run, in model cells, positive into side b.

        Parameters
        ----------
        line : DivideLine
            The piece, in the DEM's grid coordinates (side a on its left).
        sides : ndarray of int, model-grid shape
            Labels of the basins the pieces separate, on the model grid (:meth:`on_model_grid`).
        label_a, label_b : int
            The basins of ``sides`` on either side of the piece.
        radius_cells : int
            Cells within this many model cells of the piece count (:data:`PIECE_RADIUS_CELLS`).

        Returns
        -------
        float
            The area the run's basins on side b gave to those on side a next to the piece, minus the
            area they won back, over the length of the piece still shared, in model cells
            (:func:`divides.model.tracking.exchange_displacement`). The run's basins of either side
            are the outlet basins at the start that hold most of that side's cells near the piece.
            0 when the run was not made (no relief); NaN when no basin of the run holds one side, both
            sides fall in one, or the two merged.
        """
        if self.n_steps == 0:
            return 0.0
        box, near, (r, c), (run_a, run_b) = self._near_piece(line, sides, label_a, label_b, radius_cells)
        if run_a == 0 or run_b == 0 or run_a == run_b:
            return math.nan
        end_a, end_b = int(self.match[run_a]), int(self.match[run_b])
        if end_a == 0 or end_b == 0 or end_a == end_b:
            return math.nan
        end, start = self.after[box], self.before[box]
        r0, c0 = box[0].start, box[1].start
        piece = DivideLine(r - r0, c - c0, np.asarray(line.x), np.asarray(line.y), np.asarray(line.distance_m),
                           np.asarray(line.elevation_m))
        moved = exchange_displacement(self._cell_area[box], (near & (start == run_a), near & (start == run_b)),
                                      (near & (end == end_a), near & (end == end_b)), [piece])
        return float(moved) / self.cell_m

    def piece_basins(self, line: DivideLine, sides: np.ndarray, label_a: int, label_b: int,
                     radius_cells: int = PIECE_RADIUS_CELLS) -> tuple[int, int]:
        """The outlet basins of the start (labels of ``before``; 0: none) that hold most of each side's cells
        within ``radius_cells`` model cells of a piece of divide (arguments as :meth:`piece_shift`)."""
        return self._near_piece(line, sides, label_a, label_b, radius_cells)[3]

    def _near_piece(self, line: DivideLine, sides: np.ndarray, label_a: int, label_b: int, radius_cells: int):
        """The box of the model grid around a piece, its cells within ``radius_cells``, the piece's model-grid
        coordinates and the run's basins of either side (:meth:`piece_basins`)."""
        f = self.factor
        r = (np.asarray(line.row, dtype=np.float64) - 0.5 * (f - 1)) / f
        c = (np.asarray(line.col, dtype=np.float64) - 0.5 * (f - 1)) / f
        rows, cols = self.grid.shape
        pad = int(radius_cells) + 1
        r0, c0 = max(0, int(np.floor(r.min())) - pad), max(0, int(np.floor(c.min())) - pad)
        r1, c1 = min(rows, int(np.ceil(r.max())) + pad + 1), min(cols, int(np.ceil(c.max())) + pad + 1)
        box = (slice(r0, r1), slice(c0, c1))
        near = np.ones((r1 - r0, c1 - c0), dtype=bool)
        near[np.clip(np.rint(r).astype(np.int64) - r0, 0, r1 - r0 - 1),
             np.clip(np.rint(c).astype(np.int64) - c0, 0, c1 - c0 - 1)] = False
        near = ndimage.distance_transform_edt(near) <= radius_cells
        start, side = self.before[box], np.asarray(sides)[box]
        run_a = _most_common(start[near & (side == label_a) & (start > 0)])
        run_b = _most_common(start[near & (side == label_b) & (start > 0)])
        return box, near, (r, c), (run_a, run_b)


def _most_common(values: np.ndarray) -> int:
    """The most frequent value (0 for none)."""
    if values.size == 0:
        return 0
    uniq, counts = np.unique(values, return_counts=True)
    return int(uniq[np.argmax(counts)])


#: The balances :func:`landscape_shift` can run under; ``"steady-local<σ>"`` (σ a number of model cells, e.g.
#: ``"steady-local10"``) is :func:`local_uplift` at that σ.
BALANCES = ("channels", "steady", "steady-basins", "steady-local<σ>")


def landscape_shift(dem: Dem, *, theta: float, n: float, closed_edges: tuple[str, ...], channel_area_m2: float,
                    horizon_tau: float = FORWARD_HORIZON_TAU, max_steps: int = 60,
                    balance: str = "channels") -> LandscapeShift:
    """One forward run of a whole DEM over ``horizon_tau`` response times, K unknown.

    Parameters
    ----------
    dem : Dem
    theta, n : float
        Concavity and slope exponent (m = θ n).
    closed_edges : tuple of str
        DEM edges no water leaves.
    channel_area_m2 : float
        Channel threshold of the DEM (the reference channels are at least two model cells).
    horizon_tau : float
        Horizon in response times.
    max_steps : int
        Most time steps (>= 20).
    balance : {"channels", "steady", "steady-basins"}
        How uplift balances the present landscape: ``"channels"``, one rate, the median
        A^m S^n of its channels at K = 1, without diffusion; ``"steady"``, one rate and a
        diffusivity fitted so that the present surface is the model's steady state
        (:func:`steady_uplift`); ``"steady-basins"``, the same with one rate per outlet basin,
        which absorbs a contrast of uplift, erodibility or runoff between whole basins;
        ``"steady-local<σ>"``, the rate read within each outlet basin over a Gaussian window of σ
        model cells (:func:`local_uplift`), which absorbs contrasts wider than the window wherever
        they lie.

    Returns
    -------
    LandscapeShift
        Outlet basins of the model grid at the start and at the end of the run. Uplift
        scales with K, so the shift over a horizon in response times does not depend on K
        (Royden & Perron 2013); the response time is relief / U (Whipple 2001). Without
        relief or channels that drain downhill nothing is run (``n_steps`` 0, every shift 0).
    """
    return landscape_shifts(dem, theta=theta, n=n, closed_edges=closed_edges, channel_area_m2=channel_area_m2,
                            horizon_tau=horizon_tau, max_steps=max_steps, balances=(balance,))[0]


def landscape_shifts(dem: Dem, *, theta: float, n: float, closed_edges: tuple[str, ...], channel_area_m2: float,
                     balances: tuple[str, ...], horizon_tau: float = FORWARD_HORIZON_TAU,
                     max_steps: int = 60, start: ModelStart | None = None, workers: int = 1) -> list[LandscapeShift]:
    """:func:`landscape_shift` under each of ``balances``, from one model grid (routed once, or ``start`` when
    given: :func:`model_start` of the same DEM and options): the runs share :meth:`LandscapeShift.on_model_grid`
    and their outlet basins at the start. With ``workers`` > 1 the runs go side by side as Dask tasks on that many
    threads (the same results: each run is deterministic and reads ``start`` only)."""
    if not (np.isfinite(horizon_tau) and horizon_tau > 0):
        raise ParameterError(f"the forward run's horizon must be > 0 response times; got {horizon_tau!r}")
    for balance in balances:
        _local_sigma(balance)  # checks the name
    if start is None:
        start = model_start(dem, theta=theta, n=n, closed_edges=closed_edges, channel_area_m2=channel_area_m2)
    slope = slopes(start.flow)[start.cells]
    s_ref = float(np.median(slope)) if slope.size else 1.0

    def one(balance: str) -> LandscapeShift:
        if balance == "channels":
            area = start.flow.area.ravel()[start.cells]
            uplift = u_scale = float(np.median(area ** start.m * slope ** n)) if start.cells.size else 0.0
            diffusivity = 0.0
        else:
            sigma = _local_sigma(balance)
            uplift, diffusivity = (steady_uplift(start, n, per_basin=balance == "steady-basins") if sigma is None
                                   else local_uplift(start, n, sigma))
            u_scale = float(np.median(uplift[start.before > 0])) if np.any(start.before > 0) else 0.0
        return run_from(start, uplift=uplift, diffusivity=diffusivity, n=n, u_scale=u_scale, s_ref=s_ref,
                        horizon_tau=horizon_tau, max_steps=max_steps)

    if workers > 1 and len(balances) > 1:
        import dask

        return list(dask.compute(*[dask.delayed(one, pure=False)(b) for b in balances], scheduler="threads",
                                 num_workers=min(int(workers), len(balances))))
    return [one(balance) for balance in balances]


#: Outlet basins of fewer model cells share one uplift rate in :func:`steady_uplift` (``per_basin``).
MIN_BALANCE_CELLS = 20


def steady_uplift(start: ModelStart, n: float, *, per_basin: bool = False) -> tuple[np.ndarray, float]:
    """Uplift field and diffusivity (K = 1) for which the present surface is the model's steady state.

    At steady state every cell obeys U = K A^m S^n − D ∇²z (Perron, Kirchner & Dietrich 2009; the
    hillslope half is the hilltop balance of Roering, Perron & Kirchner 2007). Over the model grid's
    cells in an outlet basin with a slope to their receiver and a full stencil, A^m S^n is regressed on
    ∇²z by least squares: the slope is D (clipped at 0), the intercept U, one for the whole landscape or,
    with ``per_basin``, one per outlet basin (basins under :data:`MIN_BALANCE_CELLS` cells share one)
    with a shared D. U below 0 is returned as 0.

    Returns
    -------
    (ndarray, float)
        U on the model grid (m/yr at K = 1) and D (m²/yr at K = 1).
    """
    fluvial, lap, sel = balance_terms(start, n)
    lab = start.before.ravel().astype(np.int64)
    groups = lab if per_basin else (lab > 0).astype(np.int64)
    size = int(groups.max()) + 1
    small = np.bincount(groups[sel], minlength=size) < MIN_BALANCE_CELLS
    groups = np.where(small[groups], 0, groups)
    g, f, c = groups[sel], fluvial[sel], lap[sel]
    count = np.maximum(np.bincount(g, minlength=size), 1).astype(np.float64)
    f_mean, c_mean = np.bincount(g, f, minlength=size) / count, np.bincount(g, c, minlength=size) / count
    dc = c - c_mean[g]
    spread = float(np.sum(dc * dc))
    d = max(float(np.sum(dc * (f - f_mean[g])) / spread), 0.0) if spread > 0 else 0.0
    return np.maximum(f_mean - d * c_mean, 0.0)[groups].reshape(start.grid.shape), d


def local_uplift(start: ModelStart, n: float, sigma_cells: float) -> tuple[np.ndarray, float]:
    """Uplift field and diffusivity (K = 1) of the steady balance read locally within each outlet basin.

    Each cell's U is the steady residual A^m S^n − D ∇²z (D of :func:`steady_uplift` with ``per_basin``) averaged
    over the readable cells (:func:`balance_terms`) of its own outlet basin, weighted by a Gaussian of
    ``sigma_cells`` model cells (normalised convolution, Knutsson & Westin 1993). A contrast of uplift,
    erodibility or runoff wider than the window is absorbed wherever it lies, also inside a basin (the per-basin
    rate of :func:`steady_uplift` absorbs only contrasts that follow the basins' boundaries); a contrast
    narrower than the window, such as the step of a knickpoint, is spread over it. Basins of fewer than
    :data:`MIN_BALANCE_CELLS` readable cells, and cells with no readable cell of their basin within three σ,
    keep :func:`steady_uplift`'s per-basin rate. U below 0 is returned as 0.
    """
    if not (math.isfinite(sigma_cells) and sigma_cells > 0):
        raise ParameterError(f"the local balance's window must be > 0 model cells; got {sigma_cells!r}")
    basin_u, diffusivity = steady_uplift(start, n, per_basin=True)
    fluvial, lap, sel = balance_terms(start, n)
    shape = start.grid.shape
    readable_all = sel.reshape(shape)
    residual = np.where(sel, fluvial - diffusivity * lap, 0.0).reshape(shape)  # NaN ∇²z lies outside sel
    uplift = basin_u.copy()
    pad = int(math.ceil(3.0 * sigma_cells))
    for label, box in enumerate(ndimage.find_objects(start.before), start=1):
        if box is None:
            continue
        box = tuple(slice(max(b.start - pad, 0), b.stop + pad) for b in box)
        inside = start.before[box] == label
        readable = inside & readable_all[box]
        if np.count_nonzero(readable) < MIN_BALANCE_CELLS:
            continue
        total = ndimage.gaussian_filter(np.where(readable, residual[box], 0.0), sigma_cells, mode="constant",
                                        truncate=3.0)
        count = ndimage.gaussian_filter(readable.astype(np.float64), sigma_cells, mode="constant", truncate=3.0)
        near = inside & (count > 1e-9)
        uplift[box][near] = total[near] / count[near]
    return np.maximum(uplift, 0.0), diffusivity


def _local_sigma(balance: str) -> float | None:
    """σ (model cells) of a ``"steady-local<σ>"`` balance; None for the other balances; ParameterError otherwise."""
    if balance in BALANCES[:3]:
        return None
    prefix = "steady-local"
    try:
        sigma = float(balance[len(prefix):]) if balance.startswith(prefix) else math.nan
    except ValueError:
        sigma = math.nan
    if not (math.isfinite(sigma) and sigma > 0):
        raise ParameterError(f"balance must be one of {', '.join(map(repr, BALANCES))} (σ > 0 model cells); "
                             f"got {balance!r}")
    return sigma


def balance_terms(start: ModelStart, n: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The two halves of the steady balance on the model grid, flat: A^m S^n (K = 1) and ∇²z, and the cells
    it is read on (in an outlet basin, a slope to their receiver and a full stencil)."""
    sl = slopes(start.flow)
    fluvial = np.asarray(start.flow.area, dtype=np.float64).ravel() ** start.m * sl ** n
    lap = laplacian(start.grid).ravel()
    return fluvial, lap, (start.before.ravel() > 0) & (sl > 0) & np.isfinite(lap)


@dataclass(frozen=True, eq=False)
class ModelStart:
    """The start of a landscape run: the model grid, its flow and outlet basins, the exponent m, the
    reference channel area, the channel cells and the relief (what every uplift set-up shares)."""

    grid: Dem
    factor: int
    closed: tuple[str, ...]
    flow: object
    before: np.ndarray
    m: float
    a_ref: float
    cells: np.ndarray
    relief: float


def model_start(dem: Dem, *, theta: float, n: float, closed_edges: tuple[str, ...],
                channel_area_m2: float, block: int | None = None) -> ModelStart:
    """The DEM on the model grid (block-averaged to at most 300 cells a side, or by ``block`` cells a side when
    given; :func:`divides.model.forward_run.coarsen`), routed, with its outlet basins and channels (no run yet)."""
    grid, factor = coarsen(dem, block=block)
    closed = tuple(closed_edges)
    flow = route(grid, closed_edges=closed)
    before, _ = outlet_basins(flow, min_cells=1)
    a_ref = max(float(channel_area_m2), 2.0 * float(np.max(grid.cell_area)))
    z = np.where(grid.valid, grid.elevation, np.nan)
    relief = float(np.nanmax(z) - np.nanmin(z)) if np.isfinite(z).any() else 0.0
    return ModelStart(grid, factor, closed, flow, before, theta * n, a_ref, channel_cells(flow, grid.valid, a_ref),
                      relief)


def run_from(start: ModelStart, *, uplift: float | np.ndarray, diffusivity: float, n: float, u_scale: float,
             s_ref: float, horizon_tau: float = FORWARD_HORIZON_TAU, max_steps: int = 60) -> LandscapeShift:
    """Run the model from ``start`` for ``horizon_tau`` response times (relief / ``u_scale``) at K = 1 and
    match its outlet basins; nothing is run without relief or uplift."""
    grid, before = start.grid, start.before
    if not (start.relief > 0 and u_scale > 0):
        return LandscapeShift(grid, start.factor, before, before, np.arange(int(before.max()) + 1), math.inf, 0)
    years = horizon_tau * start.relief / u_scale
    _, _, _, dt = time_steps(grid, years, k=1.0, m=start.m, n=n, a_ref=start.a_ref, s_ref=s_ref,
                             max_steps=int(max_steps))
    result = simulate(grid, duration=years, dt=dt, uplift=uplift, erodibility=1.0, m=start.m, n=n,
                      diffusivity=diffusivity, edges={e: "closed" for e in start.closed})
    after, _ = outlet_basins(route(result.final, closed_edges=start.closed), min_cells=1)
    return LandscapeShift(grid, start.factor, before, after, match_labels(before, after, int(before.max())), years,
                          int(result.n_steps))
