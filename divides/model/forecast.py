"""Forecast: run the forward model on a real DEM, with parameters from an assessment, and track its divide.

The assessment gives the concavity θ (with an interval), the slope exponent n
and a calibration of erodibility K (from a measured erosion rate, a given K
or a dated knickpoint). The present surface is the starting state; its open
edges are held at their present elevations and uplift is set so that the
present landscape is in balance (see :func:`forecast`). The model runs
``years`` forward for a central parameter set and for an ensemble over the
uncertainty of K and θ; the divide between the two sides is tracked through
time. The result is a screening estimate: modelled timescales depend on the
solver, time step and grid (Forte & Barnhart 2024, ESurf 12) and on the
calibration.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
from affine import Affine
from scipy import ndimage

from divides.terrain.sides import SideSpec, resolve_sides
from divides.assess.verdict import CAUTION
from divides._jsonable import to_jsonable
from divides.errors import ParameterError, SideError
from divides.io.dem import Dem
from divides.model.forcing import check_positive
from divides.model.simulate import simulate
from divides.model.tracking import OPPOSITE, divide_positions
from divides.terrain.divide_lines import divide_between
from divides.terrain.routing import FlowGraph, route

if TYPE_CHECKING:  # pragma: no cover - for type hints only
    from divides.assess.assessment import Assessment

__all__ = [
    "SCHEMA",
    "MAX_CELLS",
    "DEFAULT_DIFFUSIVITY",
    "UPLIFT_MODES",
    "TIMESCALE_CAUTION",
    "NEEDS_CALIBRATION",
    "ForecastRun",
    "Forecast",
    "coarsen",
    "forecast",
]

#: Identifies the layout of :meth:`Forecast.to_dict` (``forecast.json``).
SCHEMA = "divides.forecast/1"

#: Larger DEMs are block-averaged to at most this many cells along each side.
MAX_CELLS = 300

#: Default hillslope diffusivity (m²/yr): the low end of values usually quoted
#: for soil-mantled slopes, 1e-3 to 1e-2 m²/yr (from memory), so that channels drive the motion.
DEFAULT_DIFFUSIVITY = 1e-3

#: How uplift balances the present landscape: one rate for the whole grid, or one per side.
UPLIFT_MODES = ("uniform", "sides")

#: Every forecast carries this besides :data:`divides.assess.verdict.CAUTION`.
TIMESCALE_CAUTION = (
    "Modelled timescales depend on the solver, the time step and the grid (Forte & Barnhart 2024, "
    "ESurf 12) and on the calibration of erodibility: read the years and metres as a screening estimate, "
    "not a prediction."
)

#: The message when no calibration of erosion was given.
NEEDS_CALIBRATION = (
    "a forecast needs erosion rates in metres per year: give a measured erosion rate of either side "
    "(erosion_rate_a_mm_yr / erosion_rate_b_mm_yr; --erosion-rate-a/-b in mm/yr), an erodibility K "
    "(erodibility; --erodibility-k) or the age of a knickpoint (knickpoint_age_years)"
)

_MIN_STEPS = 20
_MAX_STEPS = 400
_TRACK_INTERVALS = 10
_CALIBRATION_OPTIONS = ("erosion_rate_a_mm_yr", "erosion_rate_b_mm_yr", "erodibility", "knickpoint_age_years")


# ------------------------------------------------------------------ results
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
    positions : ndarray or None
        Per-line divide positions (m from side a's edge), for two opposite DEM edges.
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
    positions: np.ndarray | None
    final: Dem
    mask_a: np.ndarray
    mask_b: np.ndarray
    lines: list
    n_steps: int
    dt: float
    courant: float
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
            "displacement_m": _finite(self.displacement_m[-1]),
            "n_steps": self.n_steps,
            "dt_yr": self.dt,
            "courant": self.courant,
            "captured": self.captured,
        }


@dataclass(frozen=True, eq=False)
class Forecast:
    """Where the divide between two sides is forecast to be after ``years``.

    Displacements are the mean distance the divide moves (m), positive into
    side b (side a gains ground), negative into side a.

    Attributes
    ----------
    years : float
    side_a, side_b : str
        The side SPECs.
    dem : Dem
        The model grid at the start (the DEM, block-averaged if it was large).
    factor : int
        Block size of the averaging (1: the DEM's own grid).
    source_shape : (int, int)
        Shape of the DEM given.
    present : list of DivideLine
        The divide on the model grid at the start.
    present_length_m : float
    central : ForecastRun
        Best-estimate parameters (median K, θ of the assessment).
    members : tuple of ForecastRun
        The ensemble over K and θ (the central run excluded).
    parameters : dict
        Effective parameters (JSON-ready).
    notes : list of str
        What was assumed or changed, in plain words.
    assessment : dict
        The assessment's verdict and rate, for comparison.
    """

    years: float
    side_a: str
    side_b: str
    dem: Dem
    factor: int
    source_shape: tuple[int, int]
    present: list
    present_length_m: float
    central: ForecastRun
    members: tuple
    parameters: dict
    notes: list = field(default_factory=list)
    assessment: dict = field(default_factory=dict)

    @property
    def times(self) -> np.ndarray:
        """Years since the start at which the divide was measured."""
        return self.central.times

    @property
    def band(self) -> dict[str, np.ndarray]:
        """``low``, ``best``, ``high`` displacement (m) through time.

        ``best`` is the central run; ``low`` and ``high`` the least and
        greatest displacement among the ensemble members (equal to ``best``
        without members).
        """
        best = self.central.displacement_m
        if not self.members:
            return {"low": best.copy(), "best": best.copy(), "high": best.copy()}
        stack = np.vstack([r.displacement_m for r in self.members])
        # fmin/fmax skip NaN (a run whose divide left the grid) without warnings
        return {"low": np.fmin.reduce(stack, axis=0), "best": best.copy(), "high": np.fmax.reduce(stack, axis=0)}

    def _extreme(self, which: str) -> ForecastRun:
        if not self.members:
            return self.central
        final = np.array([r.displacement_m[-1] for r in self.members])
        if np.all(np.isnan(final)):
            return self.central
        pick = np.nanargmin(final) if which == "low" else np.nanargmax(final)
        return self.members[int(pick)]

    @property
    def low_run(self) -> ForecastRun:
        """The member with the least final displacement (its divide line is the ``low`` band)."""
        return self._extreme("low")

    @property
    def high_run(self) -> ForecastRun:
        """The member with the greatest final displacement (its divide line is the ``high`` band)."""
        return self._extreme("high")

    @property
    def resolution_m(self) -> float:
        """Half the model cell size: smaller displacements are not resolved."""
        return 0.5 * float(min(np.min(self.dem.dx), np.min(self.dem.dy)))

    @property
    def moves_toward(self) -> str:
        """``"a"`` or ``"b"`` (the side the divide moves into), or ``"stable"`` (within half a cell)."""
        best = self.central.displacement_m[-1]
        if not np.isfinite(best) or abs(best) < self.resolution_m:
            return "stable"
        return "b" if best > 0 else "a"

    @property
    def bands_agree(self) -> bool:
        """True when low, best and high all move the divide the same way by more than half a cell."""
        final = [v[-1] for v in self.band.values()]
        r = self.resolution_m
        return bool(all(v > r for v in final) or all(v < -r for v in final))

    def text(self) -> str:
        """The forecast in plain words (several lines)."""
        band = {k: v[-1] for k, v in self.band.items()}
        names = {"a": f"side a ({self.side_a})", "b": f"side b ({self.side_b})"}
        lines = []
        toward = self.moves_toward
        if toward == "stable":
            lines.append(f"In {self.years:,.0f} years the divide stays within half a model cell "
                         f"({self.resolution_m:,.0f} m) of its present position (central run).")
        else:
            lines.append(f"In {self.years:,.0f} years the divide moves about {abs(band['best']):,.0f} m "
                         f"into {names[toward]} (central run).")
        if self.members:
            lines.append(f"Ensemble range: {band['low']:,.0f} to {band['high']:,.0f} m (positive: into side b), "
                         f"{1 + len(self.members)} runs over K and θ; "
                         + ("every run moves it the same way." if self.bands_agree
                            else "the runs do not agree on the direction."))
        else:
            lines.append("One run only: no ensemble range.")
        rate = 1e3 * band["best"] / self.years
        lines.append(f"Mean rate {rate:.3g} mm/yr (positive: into side b).")
        lines += self.notes
        lines += [TIMESCALE_CAUTION, CAUTION]
        return "\n".join(lines)

    def to_dict(self) -> dict:
        """JSON-ready document (schema :data:`SCHEMA`)."""
        band = self.band
        final = {k: _finite(v[-1]) for k, v in band.items()}
        rate = {k: (None if v is None else 1e3 * v / self.years) for k, v in final.items()}
        dem = self.dem
        return to_jsonable({
            "schema": SCHEMA,
            "dem": {"path": dem.path, "crs": None if dem.crs is None else dem.crs.to_string(),
                    "shape": list(self.source_shape), "geographic": dem.geographic},
            "model_grid": {"shape": list(dem.shape), "cell_size_m": list(dem.cell_size_m),
                           "block_averaged_by": self.factor},
            "sides": {"a": self.side_a, "b": self.side_b},
            "years": self.years,
            "moves_toward": self.moves_toward,
            "bands_agree": self.bands_agree,
            "displacement_m": final,
            "rate_mm_per_yr": rate,
            "resolution_m": self.resolution_m,
            "present_divide_length_m": self.present_length_m,
            "track": {"times_yr": self.times, **{k: v for k, v in band.items()}},
            "parameters": self.parameters,
            "runs": [self.central.summary()] + [r.summary() for r in self.members],
            "assessment": self.assessment,
            "notes": self.notes,
            "timescale_caution": TIMESCALE_CAUTION,
            "caution": CAUTION,
        })


def _finite(v: Any) -> float | None:
    v = float(v)
    return v if math.isfinite(v) else None


# ------------------------------------------------------------------ the grid
def coarsen(dem: Dem, *, max_cells: int = MAX_CELLS) -> tuple[Dem, int]:
    """Block-average a DEM so that neither side exceeds ``max_cells`` cells.

    Parameters
    ----------
    dem : Dem
    max_cells : int
        Largest number of cells along either side of the result.

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
    rows, cols = dem.shape
    f = max(1, math.ceil(max(rows, cols) / max_cells))
    if f == 1:
        return dem, 1
    rr, cc = math.ceil(rows / f) * f, math.ceil(cols / f) * f
    z = np.where(dem.valid, dem.elevation, np.nan).astype(np.float64)
    z = np.pad(z, ((0, rr - rows), (0, cc - cols)), mode="edge")
    blocks = z.reshape(rr // f, f, cc // f, f)
    ok = np.isfinite(blocks)
    count = ok.sum(axis=(1, 3))
    total = np.where(ok, blocks, 0.0).sum(axis=(1, 3))
    out = np.full(count.shape, np.nan)
    keep = 2 * count >= f * f
    out[keep] = total[keep] / count[keep]
    transform = dem.transform @ Affine.scale(f)
    if dem.crs is None:
        cell = (float(np.median(dem.dx)) * f, float(np.median(dem.dy)) * f)
        small = Dem.from_array(out, cell_size=cell, transform=transform, valid_range=None, path=dem.path)
    else:
        small = Dem.from_array(out, transform=transform, crs=dem.crs, valid_range=None, path=dem.path)
    return small, f


def _upstream(flow: FlowGraph, seeds: np.ndarray) -> np.ndarray:
    """Cells draining through any seed (each seed's upstream cells are a run of the order)."""
    mask = np.zeros(flow.receivers.size, dtype=bool)
    pos, count = flow.order_position, flow.upstream_count
    for s in np.unique(seeds):
        p = int(pos[s])
        if p >= 0:
            mask[flow.order[p: p + int(count[s])]] = True
    return mask.reshape(flow.shape)


def _model_specs(assessment: Assessment, factor: int, grid: Dem) -> tuple[SideSpec, SideSpec, float]:
    """Side SPECs on the model grid: edges as given, points at their snapped cells."""
    specs = []
    for side in (assessment.sides.a, assessment.sides.b):
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


# ------------------------------------------------------------------ parameters
@dataclass(frozen=True)
class _Calibrated:
    """Erodibility as a function of θ and of the quantile of the calibration's K samples."""

    source: str
    theta0: float
    n: float
    a0: float
    ksn: np.ndarray  # per channel node, reported ksn at θ0
    area: np.ndarray  # per channel node, drainage area (m²)
    side: np.ndarray  # per channel node, 1 = a, 2 = b
    k_samples: np.ndarray | None  # K of E = K ksn^n at θ0 (calibration units)
    rates: tuple[float, float] | None  # erosion rates of a and b (m/yr) when both were given
    reference: tuple[int, ...]  # side codes whose median ksn anchors K across θ

    def _ksn(self, theta: float, codes: tuple[int, ...]) -> float:
        """Median steepness S A^θ (A0 = 1 m²) of the sides' channel nodes at concavity θ."""
        sel = np.isin(self.side, codes) & np.isfinite(self.ksn) & (self.ksn > 0) & (self.area > 0)
        if not sel.any():
            names = " and ".join("ab"[c - 1] for c in codes)
            raise ParameterError(f"side {names} has no channel steepness (ksn) to calibrate erodibility from; "
                                 "lower the channel threshold or choose larger basins")
        return float(np.median(self.ksn[sel] * self.area[sel] ** (theta - self.theta0))) * self.a0 ** self.theta0

    def erodibility(self, theta: float, q: float) -> tuple[float, float]:
        """K of sides a and b (m^(1-2m)/yr, m = θ n) at concavity θ and quantile q of the K samples."""
        if self.rates is not None:
            k_a, k_b = (e / self._ksn(theta, (c,)) ** self.n for e, c in zip(self.rates, (1, 2)))
            return k_a, k_b
        k_cal = float(np.quantile(self.k_samples, q))
        # E at the reference median steepness stays what the calibration says whatever θ.
        rate = k_cal * (self._ksn(self.theta0, self.reference) * self.a0 ** -self.theta0) ** self.n
        k = rate / self._ksn(theta, self.reference) ** self.n
        return k, k


def _calibrated(assessment: Assessment) -> _Calibrated:
    cal = assessment.calibration
    if not cal.available:
        raise ParameterError(NEEDS_CALIBRATION)
    prof = assessment.profiles
    common = dict(source=cal.source, theta0=float(prof.theta), n=float(assessment.config.n),
                  a0=float(assessment.config.a0_m2), ksn=np.asarray(prof.ksn, dtype=np.float64),
                  area=np.asarray(prof.channels.area, dtype=np.float64), side=np.asarray(prof.side))
    if cal.k is None:  # both sides' rates given directly
        ea = float(np.nanmedian(cal.erosion_a))
        eb = float(np.nanmedian(cal.erosion_b))
        return _Calibrated(**common, k_samples=None, rates=(ea, eb), reference=(1, 2))
    k = np.asarray(cal.k, dtype=np.float64)
    k = k[np.isfinite(k) & (k > 0)]
    if k.size == 0:
        raise ParameterError(f"the calibration ({cal.source}) gave no usable erodibility: the calibrated side has "
                             "no channel steepness; calibrate on the other side or give K")
    reference = {"erosion rate of side a": (1,), "erosion rate of side b": (2,)}.get(cal.source, (1, 2))
    return _Calibrated(**common, k_samples=k, rates=None, reference=reference)


def _theta_interval(assessment: Assessment) -> tuple[float, float, str]:
    prof = assessment.profiles
    theta = float(prof.theta)
    est = prof.concavity.get("both")
    if prof.theta_source == "collinearity" and est is not None and np.all(np.isfinite(est.ci95)):
        lo, hi = (float(v) for v in est.ci95)
        return min(lo, theta), max(hi, theta), "95 % interval of the collinearity estimate"
    # common practice: θ is known to about ±0.1 (as in the assessment's robustness re-runs)
    return max(theta - 0.1, 0.5 * theta), theta + 0.1, "θ ± 0.1 (common practice)"


def _design(n_runs: int, seed: int) -> list[tuple[float, float]]:
    """(quantile of K, position in the θ interval) of each ensemble member: a seeded Latin hypercube."""
    k = n_runs - 1
    if k <= 0:
        return []
    rng = np.random.default_rng(seed)
    cols = [(rng.permutation(k) + rng.random(k)) / k for _ in range(2)]
    # K quantiles over the central 95 % of the calibration's samples
    return [(0.025 + 0.95 * float(cols[0][i]), float(cols[1][i])) for i in range(k)]


# ------------------------------------------------------------------ one run
@dataclass(frozen=True, eq=False)
class _Setup:
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
    tracked: tuple[str, str] | None
    walls: np.ndarray
    channel_area_m2: float
    length_m: float
    present: list


def _slopes(flow: FlowGraph) -> np.ndarray:
    """Gradient to the receiver on the conditioned surface (0 at outlets), flat."""
    z = np.asarray(flow.conditioned.surface, dtype=np.float64).ravel()
    dist = np.asarray(flow.distance, dtype=np.float64).ravel()
    drop = z - z[flow.receivers]
    out = np.zeros(z.size)
    ok = (dist > 0) & np.isfinite(drop)
    out[ok] = drop[ok] / dist[ok]
    return out


def _channel_cells(setup: _Setup, mask: np.ndarray) -> np.ndarray:
    """Flat indices of a side's channel cells on the model grid (at least three)."""
    area = setup.flow.area.ravel()
    slope = _slopes(setup.flow)
    side = mask.ravel() & (slope > 0)
    cells = np.flatnonzero(side & (area >= setup.channel_area_m2))
    if cells.size < 3:  # grid too coarse for the threshold: the side's largest tenth
        cand = np.flatnonzero(side)
        if cand.size == 0:
            return cand
        cells = cand[area[cand] >= np.quantile(area[cand], 0.9)]
    return cells


def _balance_uplift(setup: _Setup, k_field: np.ndarray, m: float, n: float) -> tuple[float, float, float, float]:
    """Median erosion rate K A^m S^n of each side's channels on the model grid, their median slope and area."""
    area = setup.flow.area.ravel()
    slope = _slopes(setup.flow)
    k_flat = np.broadcast_to(k_field, setup.grid.shape).ravel()
    rates, slopes = [], []
    for mask in (setup.mask_a, setup.mask_b):
        cells = _channel_cells(setup, mask)
        if cells.size == 0:
            raise SideError("a side has no cell that drains downhill on the model grid; choose larger sides")
        rates.append(float(np.median(k_flat[cells] * area[cells] ** m * slope[cells] ** n)))
        slopes.append(slope[cells])
    return rates[0], rates[1], float(np.median(np.concatenate(slopes))), setup.channel_area_m2


def _displacement(setup: _Setup, flow: FlowGraph, mask_a: np.ndarray, mask_b: np.ndarray,
                  pos0: np.ndarray | None) -> tuple[float, np.ndarray | None]:
    """Mean divide displacement since the start (m, into side b) and per-line positions."""
    pos = None
    if setup.tracked is not None:
        pos = divide_positions(flow, *setup.tracked, where=~setup.walls)
        ref = pos if pos0 is None else pos0
        both = np.isfinite(pos) & np.isfinite(ref)
        if both.any():
            return float(np.mean(pos[both] - ref[both])), pos
    # Net area side a took from side b, spread along the present divide (also when no
    # row or column holds the divide at both times).
    area = setup.grid.cell_area_grid()
    gained = float(np.sum(area[setup.mask_b & mask_a]) - np.sum(area[setup.mask_a & mask_b]))
    return gained / setup.length_m, pos


def _run(setup: _Setup, *, label: str, theta: float, n: float, k: tuple[float, float], years: float,
         uplift_mode: str, diffusivity: float, max_steps: int) -> ForecastRun:
    m = theta * n
    k_field: Any = k[0] if k[0] == k[1] else np.where(setup.region_a, k[0], k[1])
    u_a, u_b, s_ref, a_ref = _balance_uplift(setup, np.asarray(k_field, dtype=np.float64), m, n)
    if uplift_mode == "uniform":
        u_a = u_b = 0.5 * (u_a + u_b)
        u_field: Any = u_a
    else:
        u_field = np.where(setup.region_a, u_a, u_b)
    # Time step: a knickpoint at the reference drainage area crosses about one cell per step
    # (celerity n K A^m S^(n-1); Royden & Perron 2013), within [_MIN_STEPS, max_steps] steps.
    cell = float(min(np.min(setup.grid.dx), np.min(setup.grid.dy)))
    celerity = n * max(k) * a_ref ** m * max(s_ref, 1e-12) ** (n - 1.0)
    n_steps = int(min(max(math.ceil(years * celerity / cell - 1e-9), _MIN_STEPS), max_steps))
    dt = years / n_steps
    times = np.linspace(0.0, years, min(_TRACK_INTERVALS, n_steps) + 1)
    result = simulate(setup.grid, duration=years, dt=dt, uplift=u_field, erodibility=k_field, m=m, n=n,
                      diffusivity=diffusivity, edges=setup.edges, snapshot_times=times)
    disp, areas, positions = [], [], []
    cell_area = setup.grid.cell_area_grid()
    pos0 = None
    captured = False
    mask_a, mask_b = setup.mask_a, setup.mask_b
    for i, snap in enumerate(result.snapshots):
        flow = setup.flow if i == 0 else route(snap, closed_edges=setup.closed)
        mask_a, mask_b = _upstream(flow, setup.seeds_a), _upstream(flow, setup.seeds_b)
        both = mask_a & mask_b
        if both.any():  # one side's outlet now drains through the other: a capture
            captured = True
            mask_a, mask_b = mask_a & ~both, mask_b & ~both
        d, pos = _displacement(setup, flow, mask_a, mask_b, pos0)
        if i == 0:
            pos0 = pos
        disp.append(d)
        areas.append(float(np.sum(cell_area[mask_a])))
        if pos is not None:
            positions.append(pos)
    try:
        lines = divide_between(result.final, mask_a, mask_b).lines
    except SideError:  # the sides no longer touch
        lines = []
    return ForecastRun(
        label=label, theta=theta, m=m, n=n, erodibility=(float(k[0]), float(k[1])), uplift=(u_a, u_b),
        times=np.asarray(result.times), displacement_m=np.asarray(disp), area_a_m2=np.asarray(areas),
        positions=np.vstack(positions) if positions else None, final=result.final, mask_a=mask_a, mask_b=mask_b,
        lines=lines, n_steps=result.n_steps, dt=dt, courant=celerity * dt / cell, captured=captured,
    )


def _setup(assessment: Assessment, grid: Dem, factor: int) -> _Setup:
    config = assessment.config
    closed = tuple(config.closed_edges)
    flow = route(grid, closed_edges=closed)
    spec_a, spec_b, radius = _model_specs(assessment, factor, grid)
    sides = resolve_sides(flow, spec_a, spec_b, snap_radius_m=radius)
    mask_a, mask_b = sides.a.mask, sides.b.mask
    divide = divide_between(grid, mask_a, mask_b)
    if not divide.lines:
        raise SideError("on the model grid the two sides touch only at isolated cells: no divide to forecast")
    rows, cols = grid.shape
    walls = np.zeros(grid.shape, dtype=bool)
    for e in closed:
        walls[{"north": (0, slice(None)), "south": (rows - 1, slice(None)),
               "west": (slice(None), 0), "east": (slice(None), cols - 1)}[e]] = True
    edge_a, edge_b = spec_a.edge, spec_b.edge
    tracked = (edge_a, edge_b) if edge_a is not None and OPPOSITE.get(edge_a) == edge_b else None
    threshold = float(assessment.channels.threshold.value_m2)
    return _Setup(
        grid=grid, flow=flow, seeds_a=sides.a.seeds, seeds_b=sides.b.seeds, mask_a=mask_a, mask_b=mask_b,
        region_a=_nearest_side(mask_a, mask_b), edges={e: "closed" for e in closed}, closed=closed,
        tracked=tracked, walls=walls, channel_area_m2=max(threshold, 2.0 * float(np.max(grid.cell_area))),
        length_m=divide.length_m, present=divide.lines,
    )


# ------------------------------------------------------------------ entry point
def _check_options(years: Any, n_runs: Any, seed: Any, uplift: Any, diffusivity: Any, max_steps: Any) -> float:
    years_f = check_positive(years, "years", "years")
    if not isinstance(n_runs, (int, np.integer)) or isinstance(n_runs, bool) or n_runs < 1:
        raise ParameterError(f"`n_runs` must be a whole number >= 1 (the central run plus ensemble members); "
                             f"got {n_runs!r}")
    if not isinstance(seed, (int, np.integer)) or isinstance(seed, bool):
        raise ParameterError(f"`seed` must be a whole number; got {seed!r}")
    if uplift not in UPLIFT_MODES:
        raise ParameterError(f"`uplift` must be one of {', '.join(UPLIFT_MODES)}; got {uplift!r}")
    try:
        d = float(diffusivity)
    except (TypeError, ValueError):
        d = math.nan
    if not (math.isfinite(d) and d >= 0):
        raise ParameterError(f"`diffusivity` must be a number >= 0 (m²/yr); got {diffusivity!r}")
    if not isinstance(max_steps, (int, np.integer)) or isinstance(max_steps, bool) or max_steps < _MIN_STEPS:
        raise ParameterError(f"`max_steps` must be a whole number >= {_MIN_STEPS}; got {max_steps!r}")
    return years_f


def _same_side(given: str, spec: SideSpec) -> bool:
    return " ".join(str(given).lower().split()) == " ".join(spec.text.lower().split())


def forecast(
    dem: Dem,
    side_a: str,
    side_b: str,
    *,
    years: float,
    assessment: Assessment | None = None,
    n_runs: int = 9,
    seed: int = 0,
    uplift: str = "uniform",
    diffusivity: float = DEFAULT_DIFFUSIVITY,
    max_cells: int = MAX_CELLS,
    max_steps: int = _MAX_STEPS,
    lonlat: bool = False,
    **assess_options: Any,
) -> Forecast:
    """Forecast where the divide between two sides of a DEM will be after ``years``.

    Parameters
    ----------
    dem : Dem
        The present surface.
    side_a, side_b : str
        Side SPECs as for :func:`divides.assess`: an edge or points ``x,y;x,y``.
    years : float
        How far ahead (years).
    assessment : Assessment, optional
        An assessment of the same DEM and sides; by default one is made with
        ``assess_options`` (robustness re-runs off unless asked for).
    n_runs : int
        Model runs: the central run plus ``n_runs - 1`` ensemble members
        drawn by a seeded Latin hypercube over K (the central 95 % of the
        calibration's samples) and θ (its interval).
    seed : int
        Seed of the ensemble (and of the assessment when one is made).
    uplift : {"uniform", "sides"}
        ``"uniform"`` (default): one uplift rate everywhere, the mean of the
        two sides' median channel erosion rates at the start, so the
        landscape as a whole is in balance and the side eroding faster than
        the other loses height and gives ground, as uniform uplift and
        erodibility assume (Willett et al. 2014). ``"sides"``: each side
        uplifts at its own median rate (a raster split by side), so each
        side on its own is in balance and motion comes only from where the
        landscape departs from it.
    diffusivity : float
        Hillslope diffusivity D (m²/yr); 0 turns diffusion off.
    max_cells : int
        DEMs larger than this along either side are block-averaged first.
    max_steps : int
        Most time steps per run (accuracy falls when the cap is reached; see notes).
    lonlat : bool
        SPEC points are longitude,latitude.
    **assess_options
        Options of :func:`divides.assess` (``theta``, ``n``, ``closed_edges``,
        ``erosion_rate_a_mm_yr``, ``erosion_rate_b_mm_yr``, ``erodibility``,
        ``knickpoint_age_years`` …). One calibration of erosion is required.

    Returns
    -------
    Forecast

    Raises
    ------
    ParameterError
        No calibration of erosion, a bad option, or an assessment that does
        not match the DEM and sides.
    SideError
        The sides cannot be resolved on the model grid.

    Notes
    -----
    K comes from the calibration: a measured erosion rate E of a side gives
    K = E / ksn^n with that side's median ksn (Whipple & Tucker 1999); across
    the θ interval K is re-scaled so the calibrated erosion rate holds at the
    same median channel steepness. Open edges are held at their present
    elevations, closed edges stay closed. The divide is measured from the
    model's own routing at eleven times: for two opposite edges as the mean
    over rows (or columns) of its position
    (:func:`divides.model.tracking.divide_positions`), otherwise as the net
    area side a takes from side b divided by the present divide length.

    Examples
    --------
    Two planes meeting at a crest, the western one twice as steep: it is
    lowered faster, so the crest moves east, into side b.

    >>> import numpy as np
    >>> c = np.arange(41.0)
    >>> z = np.minimum(20.0 * c, 10.0 * (40.0 - c))
    >>> dem = Dem.from_array(np.repeat(z[None], 6, axis=0), cell_size=100.0)
    >>> fc = forecast(dem, "west", "east", years=1e6, erodibility=1e-3, theta=0.1, channel_area_m2=3e4,
    ...               closed_edges=("north", "south"), n_runs=3, robustness=False)
    >>> fc.moves_toward, fc.bands_agree
    ('b', True)
    """
    years_f = _check_options(years, n_runs, seed, uplift, diffusivity, max_steps)
    if assessment is None:
        if not any(assess_options.get(k) is not None for k in _CALIBRATION_OPTIONS):
            raise ParameterError(NEEDS_CALIBRATION)
        from divides.assess.assessment import assess

        options = {"robustness": False, "seed": int(seed), **assess_options}
        assessment = assess(dem, side_a, side_b, lonlat=lonlat, **options)
    else:
        if assess_options:
            raise ParameterError(f"options {', '.join(sorted(assess_options))} belong to the assessment; "
                                 "give them to divides.assess, or leave out `assessment`")
        if assessment.dem.shape != dem.shape:
            raise ParameterError(f"the assessment was made on a {assessment.dem.shape} grid but the DEM is "
                                 f"{dem.shape}; assess this DEM first")
        if not (_same_side(side_a, assessment.sides.a.spec) and _same_side(side_b, assessment.sides.b.spec)):
            raise ParameterError(f"the assessment's sides are {assessment.sides.a.spec.text!r} and "
                                 f"{assessment.sides.b.spec.text!r}, not {side_a!r} and {side_b!r}")
    calibrated = _calibrated(assessment)
    theta_lo, theta_hi, theta_basis = _theta_interval(assessment)
    grid, factor = coarsen(dem, max_cells=max_cells)
    setup = _setup(assessment, grid, factor)

    common = dict(n=calibrated.n, years=years_f, uplift_mode=uplift, diffusivity=float(diffusivity),
                  max_steps=int(max_steps))
    central = _run(setup, label="central", theta=calibrated.theta0, k=calibrated.erodibility(calibrated.theta0, 0.5),
                   **common)
    members = []
    for i, (q_k, q_theta) in enumerate(_design(int(n_runs), int(seed))):
        theta = theta_lo + (theta_hi - theta_lo) * q_theta
        members.append(_run(setup, label=f"member {i + 1}", theta=theta, k=calibrated.erodibility(theta, q_k),
                            **common))

    notes = _notes(dem, grid, factor, central, members, calibrated, theta_basis, uplift, setup)
    if assessment.config.sea_level_m is not None:
        notes.append("The model drains only off the DEM's open edges and nodata: cells at or below the sea level "
                     "given to the assessment are not held as outlets.")
    parameters = {
        "theta": calibrated.theta0,
        "theta_interval": [theta_lo, theta_hi],
        "theta_interval_basis": theta_basis,
        "n": calibrated.n,
        "m": calibrated.theta0 * calibrated.n,
        "calibration": calibrated.source,
        "erodibility": {"a": central.erodibility[0], "b": central.erodibility[1],
                        "unit": "m^(1-2m)/yr, E = K A^m S^n"},
        "uplift_mode": uplift,
        "uplift_m_per_yr": {"a": central.uplift[0], "b": central.uplift[1]},
        "diffusivity_m2_per_yr": float(diffusivity),
        "edges": {e: ("closed" if e in setup.closed else "open, held at present elevations")
                  for e in ("north", "south", "west", "east")},
        "n_runs": int(n_runs),
        "seed": int(seed),
        "dt_yr": central.dt,
        "n_steps": central.n_steps,
        "courant": central.courant,
        "channel_area_m2": setup.channel_area_m2,
        "measure": "mean position along rows/columns between opposite edges" if setup.tracked
                   else "net area exchanged / present divide length",
    }
    verdict = assessment.verdict
    summary = {"moves_toward": verdict.moves_toward, "confidence": verdict.confidence,
               "rate_mm_per_yr": None if assessment.rate is None else
               {k: assessment.rate[k] for k in ("low", "best", "high")}}
    return Forecast(
        years=years_f, side_a=assessment.sides.a.spec.text, side_b=assessment.sides.b.spec.text, dem=grid,
        factor=factor, source_shape=tuple(dem.shape), present=setup.present, present_length_m=setup.length_m,
        central=central, members=tuple(members), parameters=parameters, notes=notes, assessment=summary,
    )


def _notes(dem: Dem, grid: Dem, factor: int, central: ForecastRun, members: list, calibrated: _Calibrated,
           theta_basis: str, uplift: str, setup: _Setup) -> list[str]:
    notes = []
    if factor > 1:
        notes.append(f"For speed the DEM ({dem.shape[0]} x {dem.shape[1]} cells) was block-averaged by {factor} x "
                     f"{factor} to {grid.shape[0]} x {grid.shape[1]} cells of about {grid.cell_size_m[0]:,.0f} m; "
                     "displacements below half a cell are not resolved.")
    runs = [central, *members]
    if any(r.courant > 1.5 for r in runs):
        notes.append("The step cap was reached: knickpoints cross more than one cell per step, which smooths "
                     "transients and can slow the modelled divide; raise max_steps for a finer run.")
    if calibrated.k_samples is None or np.ptp(calibrated.k_samples) == 0:
        notes.append(f"Erodibility from {calibrated.source} is taken as exact: the bands reflect θ only "
                     f"({theta_basis}).")
    else:
        notes.append(f"Bands span K from {calibrated.source} (central 95 % of its samples) and θ ({theta_basis}).")
    notes.append("Uplift: " + ("one rate everywhere, the mean of both sides' channel erosion rates at the start."
                               if uplift == "uniform" else
                               "each side at its own channel erosion rate at the start (fields split by side)."))
    if any(r.captured for r in runs):
        notes.append("In at least one run a side's outlet came to drain through the other side (a capture): "
                     "displacements after that are those of the remaining cells.")
    if not setup.closed and setup.tracked is None:
        notes.append("Open DEM edges hold their present elevations; cells near them are fixed at base level.")
    return notes
