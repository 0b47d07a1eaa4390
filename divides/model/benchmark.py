"""A benchmark of model landscapes whose divide motion is measured, for calibrating and judging verdicts.

Each landscape is grown with :func:`divides.model.simulate` from a seed:
parameters are drawn from broad ranges (:data:`RANGES`), one of fourteen
families of forcing is applied (:mod:`divides.model.benchmark_families`), the
surface is observed (that is the DEM of the record), and the run is then
*continued* under the same forcing to measure where the divide goes
(:func:`measure_motion`). The truth is that measurement, never the set-up.

Time is counted in response times, τ = relief / U: for E = K A^m S^n at
steady state (S = ks A^(-m/n), ks^n = U/K) the time a slope signal takes from
the outlet to the divide, ∫ dx / (K A^m S^(n-1)) (Whipple 2001; the wave
speed carries a further factor n, Royden & Perron 2013), is
χ ks / U = relief / U. Steps are fixed
fractions of τ, so every landscape costs about the same number of steps
whatever its rates.

Everything is reproducible from ``(master seed, index)``; records are
cached outside the repository (:func:`cache_root`), keyed by seed, index,
grid range and :data:`GENERATOR_VERSION`. Generation runs in parallel on a
Dask ``LocalCluster`` (:func:`generate`).
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from scipy.signal import lfilter

from divides.errors import ParameterError
from divides.io.dem import Dem
from divides.model.benchmark_families import FAMILIES, plan, resolve
from divides.model.scenarios import ridge_surface
from divides.model.simulate import simulate
from divides.terrain.routing import route

__all__ = [
    "GENERATOR_VERSION",
    "RANGES",
    "TRAINING_SHARE",
    "Landscape",
    "Truth",
    "build",
    "cache_root",
    "correlated_error",
    "draw",
    "generate",
    "landscape_seed",
    "load_folder",
    "load_or_build",
    "measure_motion",
    "split_of",
]

#: Bump when any drawn range, family or step changes: cached records of another version are not reused.
GENERATOR_VERSION = 3

#: Ranges the parameters are drawn from (uniform unless marked log-uniform).
RANGES: dict[str, tuple[float, float]] = {
    "cell_m": (10.0, 90.0),
    "grid_cells": (120, 400),            # rows and columns drawn separately
    "n": (0.7, 2.0),                     # n = 1 exactly in 30 % of landscapes and in the n = 1 tilt family
    "theta": (0.3, 0.7),                 # m / n
    "uplift_m_per_yr": (5e-5, 3e-3),     # log-uniform
    "mean_flank_gradient": (0.03, 0.3),  # log-uniform; sets the target relief, clipped to 30–1500 m
    "hillslope_cells": (0.5, 5.0),       # log-uniform; D = 0 in 25 % of landscapes
    "dem_error_sigma_m": (0.5, 2.0),     # in a third of the landscapes
    "dem_error_corr_cells": (1.0, 5.0),
}

#: Expected share of landscapes in the training part (the rest is held out).
TRAINING_SHARE = 0.5
#: Length of the continued run that measures the truth, in response times.
WINDOW_TAU = 0.3
#: Time steps per response time while observed and continued (spin-up: SPIN_STEPS_PER_TAU).
STEPS_PER_TAU = 80
SPIN_CHUNK_TAU = 2.0
SPIN_STEPS_PER_TAU = 20
MAX_SPIN_CHUNKS = 4
#: A divide moves when its rate exceeds this many cells per response time.
MOVING_CELLS_PER_TAU = 1.0
NOISE_SHARE = 1.0 / 3.0
POINT_SIDES_SHARE = 0.5
ROTATED_SHARE = 0.5
LATERAL_OPEN_SHARE = 0.3


# ---------------------------------------------------------------------------- seeds and split
def landscape_seed(master_seed: int, index: int) -> int:
    """The seed of landscape ``index`` of a benchmark drawn from ``master_seed`` (63-bit)."""
    if int(master_seed) < 0 or int(index) < 0:
        raise ParameterError(f"benchmark seed and index must be integers >= 0; got {master_seed!r}, {index!r}")
    state = np.random.SeedSequence([int(master_seed), int(index)]).generate_state(2, np.uint32)
    return int((int(state[0]) << 31) ^ int(state[1]))


def split_of(seed: int) -> str:
    """``"training"`` or ``"held-out"``: a fixed function of a landscape's seed.

    The first 8 bytes of SHA-256 of ``"divides-benchmark:<seed>"`` read as a
    fraction of 2^64; below :data:`TRAINING_SHARE` is training. It does not
    depend on the family, the outcome or the order of generation, so the
    split is decided before anything is generated or fitted.

    Examples
    --------
    >>> split_of(12345) in ("training", "held-out")
    True
    """
    digest = hashlib.sha256(f"divides-benchmark:{int(seed)}".encode()).digest()
    return "training" if int.from_bytes(digest[:8], "big") / 2.0**64 < TRAINING_SHARE else "held-out"


# ---------------------------------------------------------------------------- DEM error
def _ar1(e: np.ndarray, phi: float, start: np.ndarray, axis: int) -> np.ndarray:
    """Stationary unit-variance AR(1) along ``axis`` driven by white ``e``; ``start`` is the value before index 0."""
    y = lfilter([math.sqrt(1.0 - phi * phi)], [1.0, -phi], e, axis=axis)
    k = np.arange(1, e.shape[axis] + 1, dtype=np.float64)
    decay = phi**k
    return y + (np.expand_dims(start, axis) * (decay[None, :] if axis == 1 else decay[:, None]))


def correlated_error(shape: tuple[int, int], sigma_m: float, corr_cells: float, rng: np.random.Generator) -> np.ndarray:
    """Spatially correlated Gaussian DEM error: separable exponential covariance.

    Covariance σ² exp(-(|Δr| + |Δc|)/ℓ) on the grid: an AR(1) process with
    φ = exp(-1/ℓ) along rows and along columns (Box & Jenkins; its lag-k
    autocorrelation is φ^k), started from its stationary distribution so the
    field is stationary up to the edges.

    Parameters
    ----------
    shape : (rows, cols)
    sigma_m : float
        Standard deviation (m).
    corr_cells : float
        Correlation length ℓ in cells (> 0).
    rng : numpy.random.Generator

    Returns
    -------
    ndarray of float64
    """
    if not (sigma_m >= 0 and corr_cells > 0):
        raise ParameterError(f"DEM error needs sigma >= 0 and a correlation length > 0; got {sigma_m!r}, {corr_cells!r}")
    rows, cols = shape
    phi = math.exp(-1.0 / float(corr_cells))
    white = rng.standard_normal((rows + 1, cols))
    along_rows = _ar1(white, phi, rng.standard_normal(rows + 1), axis=1)  # each row: stationary AR(1) in columns
    field_ = _ar1(along_rows[1:], phi, along_rows[0], axis=0)  # row 0 is the stationary line before the grid
    return float(sigma_m) * field_


# ---------------------------------------------------------------------------- frames
@dataclass(frozen=True)
class _Frame:
    """Maps the canonical frame (a west, b east, forcing on b) to the landscape's frame."""

    mirror: bool  # forcing on side a
    rotate: bool  # sides north (a) and south (b)

    def fwd(self, a: Any) -> Any:
        if not isinstance(a, np.ndarray) or a.ndim != 2:
            return a
        a = a[:, ::-1] if self.mirror else a
        return np.ascontiguousarray(a.T if self.rotate else a)

    def inv(self, a: np.ndarray) -> np.ndarray:
        a = a.T if self.rotate else a
        return np.ascontiguousarray(a[:, ::-1] if self.mirror else a)

    def edge(self, name: str) -> str:
        if self.mirror:
            name = {"west": "east", "east": "west"}.get(name, name)
        if self.rotate:
            name = {"west": "north", "east": "south", "north": "west", "south": "east"}[name]
        return name

    @property
    def sides(self) -> tuple[str, str]:
        return ("north", "south") if self.rotate else ("west", "east")

    def side(self, canonical: str) -> str:
        """A side label (a, b, stable) of the canonical frame in this frame."""
        return {"a": "b", "b": "a"}.get(canonical, canonical) if self.mirror else canonical

    def forcing(self, f: dict) -> dict:
        out = {k: self.fwd(v) for k, v in f.items() if k != "edges"}
        out["edges"] = {self.edge(e): c for e, c in f["edges"].items()}
        return out


# ---------------------------------------------------------------------------- truth
@dataclass(frozen=True)
class Truth:
    """Divide motion measured by continuing a run.

    Attributes
    ----------
    moves_toward : str or None
        ``"a"``, ``"b"`` (the side the divide moves into), ``"stable"``, or
        None when fewer than three lines cross the divide throughout.
    rate_m_per_yr : float
        Least-squares rate of the mean divide position (positive: into b).
    shift_m : float
        Mean displacement over the window (positive: into b).
    window_yr, tau_yr : float
        Length of the continued run and the landscape's response time.
    threshold_m_per_yr : float
        Rate above which the divide counts as moving
        (:data:`MOVING_CELLS_PER_TAU` cells per τ).
    n_lines : int
        Lines (rows or columns) across the divide that were measured.
    """

    moves_toward: str | None
    rate_m_per_yr: float
    shift_m: float
    window_yr: float
    tau_yr: float
    threshold_m_per_yr: float
    n_lines: int

    def to_dict(self) -> dict:
        return dict(self.__dict__)


def measure_motion(surface: Dem, forcing: dict, *, sides: tuple[str, str], window_yr: float, steps: int,
                   tau_yr: float, lines: np.ndarray | None = None) -> Truth:
    """Continue a run from ``surface`` and measure the divide's motion between two opposite edges.

    Parameters
    ----------
    surface : Dem
        The observed landscape.
    forcing : dict
        Keyword arguments of :func:`~divides.model.simulate` (uplift,
        erodibility, m, n, diffusivity, runoff, edges).
    sides : (str, str)
        Side a's and side b's edges.
    window_yr : float
        Length of the continued run (years).
    steps : int
        Time steps over the window; the divide is recorded at every step.
    tau_yr : float
        Response time of the landscape (years), for the stability threshold.
    lines : ndarray of bool, optional
        Lines to measure (default all); e.g. those where the basins of point sides meet.

    Returns
    -------
    Truth
        The rate is the slope of the mean position over lines that cross
        the divide at every record, so lines appearing or vanishing do not
        read as motion.
    """
    run = simulate(surface, duration=window_yr, dt=window_yr / max(int(steps), 1), track=sides, **forcing)
    pos = run.divide.positions
    if lines is not None:
        pos = pos[:, np.asarray(lines, dtype=bool)]
    keep = np.all(np.isfinite(pos), axis=0)
    cell = float(np.median(surface.dx))
    threshold = MOVING_CELLS_PER_TAU * cell / tau_yr
    if np.count_nonzero(keep) < 3:
        return Truth(None, math.nan, math.nan, window_yr, tau_yr, threshold, int(np.count_nonzero(keep)))
    mean = pos[:, keep].mean(axis=1)
    rate = float(np.polyfit(run.divide.times, mean, 1)[0])
    toward = "stable" if abs(rate) < threshold else ("b" if rate > 0 else "a")
    return Truth(toward, rate, float(mean[-1] - mean[0]), window_yr, tau_yr, threshold, int(np.count_nonzero(keep)))


# ---------------------------------------------------------------------------- records
@dataclass(frozen=True, eq=False)
class Landscape:
    """One benchmark landscape: the observed DEM, its sides and parameters, and the measured truth.

    Attributes
    ----------
    master_seed, index, seed : int
        Benchmark seed, position in the benchmark, and the landscape's own seed.
    family : str
        One of :data:`~divides.model.benchmark_families.FAMILIES`.
    forced_side : str
        ``"a"`` or ``"b"``: the side the family's forcing acts on.
    split : str
        ``"training"`` or ``"held-out"`` (:func:`split_of` of ``seed``).
    elevation : ndarray of float32
        The observed DEM (north-up), DEM error included when ``dem_error`` is set.
    cell_size : float
        Cell size (m).
    sides : dict
        ``{"kind": "edges" | "points", "a": spec, "b": spec}`` in the
        command line's SPEC form (``"west"`` or ``"x,y;x,y"``).
    closed_edges : tuple of str
        DEM edges that were closed in the model (nothing drains off them).
    parameters : dict
        K, n, m, theta, U (m/yr), D (m²/yr), relief, τ and the family's own numbers.
    truth : dict
        :class:`Truth` as a dict.
    expected : str
        Theory's direction from the set-up (for checking the set-ups only).
    dem_error : dict or None
        ``{"sigma_m", "corr_cells"}`` of the correlated error added.
    seconds : float
        Time taken to build it.
    """

    master_seed: int
    index: int
    seed: int
    family: str
    forced_side: str
    split: str
    elevation: np.ndarray
    cell_size: float
    sides: dict
    closed_edges: tuple[str, ...]
    parameters: dict
    truth: dict
    expected: str
    dem_error: dict | None
    seconds: float
    version: int = GENERATOR_VERSION

    def dem(self) -> Dem:
        """The observed DEM as a :class:`~divides.io.dem.Dem`."""
        return Dem.from_array(self.elevation.astype(np.float64), cell_size=self.cell_size, valid_range=None)

    def to_meta(self) -> dict:
        """Everything but the elevation, JSON-ready."""
        return {k: v for k, v in self.__dict__.items() if k != "elevation"} | {"closed_edges": list(self.closed_edges)}

    def save(self, path: Path | str) -> None:
        """Write to a compressed ``.npz`` (written beside and renamed: never half-written)."""
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_name(f".{path.stem}.{os.getpid()}.tmp.npz")
        np.savez_compressed(tmp, elevation=self.elevation, meta=np.array(json.dumps(self.to_meta())))
        os.replace(tmp, path)

    @classmethod
    def load(cls, path: Path | str) -> Landscape:
        """Read a record written by :meth:`save`."""
        with np.load(path, allow_pickle=False) as data:
            meta = json.loads(str(data["meta"]))
            elevation = data["elevation"]
        meta["closed_edges"] = tuple(meta["closed_edges"])
        return cls(elevation=elevation, **meta)


# ---------------------------------------------------------------------------- drawing
def _log_uniform(rng: np.random.Generator, lo: float, hi: float) -> float:
    return float(math.exp(rng.uniform(math.log(lo), math.log(hi))))


def _chi_estimate(half_width_m: float, cell_m: float, theta: float) -> float:
    """χ (A0 = 1 m²) from the outlet to the divide of a channel obeying Hack's law.

    Hack (1957): L ≈ 1.4 A^0.6 in miles and square miles, about
    L = 0.35 A^0.6 in metres; A at least one cell at the divide.
    """
    x = np.geomspace(cell_m, half_width_m, 400)
    area = np.maximum((x / 0.35) ** (1.0 / 0.6), cell_m * cell_m)
    return float(np.trapezoid(area**-theta, x) + cell_m * (cell_m * cell_m) ** -theta)


def draw(master_seed: int, index: int, *, grid: tuple[int, int] = (120, 400)) -> dict:
    """The parameters drawn for landscape ``index`` (no simulation): family, side, grid, K, n, m, U, D, ..."""
    return _draw(master_seed, index, grid)[0]


def _draw(master_seed: int, index: int, grid: tuple[int, int]) -> tuple[dict, np.random.Generator]:
    seed = landscape_seed(master_seed, index)
    rng = np.random.default_rng(seed)
    family = FAMILIES[index % len(FAMILIES)]
    mirror = (index // len(FAMILIES)) % 2 == 1
    lo, hi = grid
    rows, cols = int(rng.integers(lo, hi + 1)), int(rng.integers(lo, hi + 1))
    cell = float(rng.uniform(*RANGES["cell_m"]))
    if family == "tilt_uplift_n_other":  # uniform on [0.7, 0.8] and [1.2, 2.0]: clear of n = 1
        u = float(rng.uniform(0.0, 0.9))
        n = 0.7 + u if u < 0.1 else 1.1 + u
    elif family == "tilt_uplift_n1" or rng.random() < 0.3:
        n = 1.0
    else:
        n = float(rng.uniform(*RANGES["n"]))
    theta = float(rng.uniform(*RANGES["theta"]))
    u0 = _log_uniform(rng, *RANGES["uplift_m_per_yr"])
    half = 0.5 * (cols - 1) * cell
    relief = float(np.clip(_log_uniform(rng, *RANGES["mean_flank_gradient"]) * half, 30.0, 1500.0))
    ks = relief / _chi_estimate(half, cell, theta)
    k0 = u0 / ks**n
    if rng.random() < 0.25:
        hill_cells, diffusivity = 0.0, 0.0
    else:
        # Diffusion balances channel steepening at hillslope length ℓ when U ℓ / D = ks ℓ^(-2θ)
        # (gradient at the foot of a steady diffusive crest, U ℓ / D, against the channel gradient there).
        hill_cells = _log_uniform(rng, *RANGES["hillslope_cells"])
        ell = hill_cells * cell
        diffusivity = u0 * ell ** (1.0 + 2.0 * theta) / ks
    lateral = {e: ("open" if rng.random() < LATERAL_OPEN_SHARE else "closed") for e in ("north", "south")}
    draw = {
        "seed": seed, "family": family, "mirror": mirror, "rotate": bool(rng.random() < ROTATED_SHARE),
        "shape": (rows, cols), "cell": cell, "n": n, "theta": theta, "m": theta * n, "u0": u0, "k0": k0,
        "ks": ks, "relief_target": relief, "hill_cells": hill_cells, "diffusivity": diffusivity, "lateral": lateral,
        "points": bool(rng.random() < POINT_SIDES_SHARE),
        "noise": ({"sigma_m": float(rng.uniform(*RANGES["dem_error_sigma_m"])),
                   "corr_cells": float(rng.uniform(*RANGES["dem_error_corr_cells"]))}
                  if rng.random() < NOISE_SHARE else None),
    }
    return draw, rng


# ---------------------------------------------------------------------------- building
def _point_sides(dem: Dem, sides: tuple[str, str], rng: np.random.Generator) -> tuple[dict, np.ndarray] | None:
    """Sides as points: outlets of the 2–4 basins of each side that hold most of the divide.

    Returns the specs and the lines (rows or columns) where the chosen basins
    face each other across the divide, or None when they do so on fewer than
    ten lines (the landscape then keeps its sides as edges).
    """
    flow = route(dem)
    basins = flow.basins()
    rows, cols = dem.shape
    r, c = np.divmod(flow.outlets, cols)
    inner = {"west": (c == 0) & (r > 0) & (r < rows - 1), "east": (c == cols - 1) & (r > 0) & (r < rows - 1),
             "north": (r == 0) & (c > 0) & (c < cols - 1), "south": (r == rows - 1) & (c > 0) & (c < cols - 1)}
    ids = [basins.ravel()[flow.outlets[inner[e]]] for e in sides]
    lab = basins if sides[0] == "west" else basins.T  # lines as rows, side a at index 0
    facing = np.isin(lab[:, :-1], ids[0]) & np.isin(lab[:, 1:], ids[1])
    crossed = facing.any(axis=1)
    k = np.argmax(facing, axis=1)
    line = np.arange(lab.shape[0])
    left, right = lab[line, k], lab[line, k + 1]
    chosen = []
    for across in (left, right):
        labels, counts = np.unique(across[crossed], return_counts=True)
        chosen.append(labels[np.argsort(-counts, kind="stable")[: int(rng.integers(2, 5))]])
    lines = crossed & np.isin(left, chosen[0]) & np.isin(right, chosen[1])
    if np.count_nonzero(lines) < 10:
        return None
    specs = {}
    outlet_of = {int(b): int(o) for b, o in zip(basins.ravel()[flow.outlets], flow.outlets)}
    for label, picked in zip(("a", "b"), chosen):
        cells = np.array([outlet_of[int(b)] for b in picked])
        x, y = dem.xy(*np.divmod(cells, cols))
        specs[label] = ";".join(f"{xi:.1f},{yi:.1f}" for xi, yi in zip(x, y))
    return {"kind": "points", **specs}, lines


def _spin_up(start: Dem, forcing: dict, physics: dict, tau: float, sides: tuple[str, str]) -> tuple[Dem, int]:
    """Run under steady forcing, in chunks, until the divide drifts less than half a cell per τ."""
    surface, chunks = start, 0
    cell = float(np.median(start.dx))
    for chunks in range(1, MAX_SPIN_CHUNKS + 1):
        years = SPIN_CHUNK_TAU * tau
        run = simulate(surface, duration=years, dt=tau / SPIN_STEPS_PER_TAU, track=sides,
                       track_interval=tau / 4, **physics, **forcing)
        surface = run.final
        if chunks >= 2:
            pos = run.divide.positions
            keep = np.all(np.isfinite(pos), axis=0)
            if np.count_nonzero(keep) >= 3:
                late = run.divide.times >= 0.5 * years
                rate = np.polyfit(run.divide.times[late], pos[late][:, keep].mean(axis=1), 1)[0]
                if abs(rate) * tau < 0.5 * cell:
                    break
    return surface, chunks


def build(master_seed: int, index: int, *, grid: tuple[int, int] = (120, 400), mirror: bool | None = None,
          rotate: bool | None = None) -> Landscape:
    """Build landscape ``index`` of the benchmark drawn from ``master_seed`` (no cache).

    Parameters
    ----------
    master_seed, index : int
        Which landscape (both >= 0).
    grid : (int, int)
        Range of rows and of columns (within 120–400 for the full benchmark;
        smaller for quick subsets).
    mirror, rotate : bool, optional
        Override the drawn side of the forcing (True: side a) and orientation
        (True: sides north and south); every other draw is unchanged, so
        ``mirror=True`` and ``mirror=False`` give mirror images of one set-up.

    Returns
    -------
    Landscape
    """
    started = time.perf_counter()
    d, rng = _draw(master_seed, index, grid)
    d["mirror"] = d["mirror"] if mirror is None else bool(mirror)
    d["rotate"] = d["rotate"] if rotate is None else bool(rotate)
    frame = _Frame(d["mirror"], d["rotate"])
    sides = frame.sides
    shape = d["shape"]
    p = plan(d["family"], rng, shape, d["u0"], d["k0"], d["lateral"])
    physics = {"m": d["m"], "n": d["n"], "diffusivity": d["diffusivity"]}
    start = ridge_surface(shape, cell_size=d["cell"], crest=p.crest, relief=0.3 * d["relief_target"],
                          noise=max(1.0, 0.01 * d["relief_target"]), seed=int(rng.integers(2**31)))
    start = Dem.from_array(frame.fwd(start.elevation), cell_size=d["cell"], valid_range=None)
    tau = d["relief_target"] / d["u0"]
    spin_chunks = 0
    if p.spin is not None:
        surface, spin_chunks = _spin_up(start, frame.forcing(p.spin), physics, tau, sides)
        z = surface.elevation
        tau = float(np.nanmax(z) - np.nanmin(z)) / d["u0"]  # the grown relief sets the time scale
    else:
        surface = start
    canonical = frame.inv(surface.elevation)
    if p.change is not None:
        surface = Dem.from_array(frame.fwd(p.change(canonical)), cell_size=d["cell"], valid_range=None)
    forcing = {**frame.forcing(resolve(p.forcing, canonical)), **physics}
    if p.observe_tau > 0:
        steps = max(5, int(round(p.observe_tau * (STEPS_PER_TAU if p.spin is not None else 40))))
        surface = simulate(surface, duration=p.observe_tau * tau, dt=p.observe_tau * tau / steps, **forcing).final
    elevation = surface.elevation
    points = _point_sides(surface, sides, rng) if d["points"] else None
    side_spec, lines = points if points is not None else ({"kind": "edges", "a": sides[0], "b": sides[1]}, None)
    truth = measure_motion(surface, forcing, sides=sides, window_yr=WINDOW_TAU * tau,
                           steps=int(WINDOW_TAU * STEPS_PER_TAU), tau_yr=tau, lines=lines)
    if d["noise"] is not None:
        elevation = elevation + correlated_error(elevation.shape, d["noise"]["sigma_m"], d["noise"]["corr_cells"], rng)
    closed = tuple(sorted(frame.edge(e) for e, c in d["lateral"].items() if c == "closed"))
    parameters = {
        "K": d["k0"], "n": d["n"], "m": d["m"], "theta": d["theta"], "U_m_per_yr": d["u0"],
        "D_m2_per_yr": d["diffusivity"], "hillslope_cells": d["hill_cells"], "ks_target": d["ks"],
        "relief_target_m": d["relief_target"], "relief_m": float(np.nanmax(elevation) - np.nanmin(elevation)),
        "tau_yr": tau, "observed_after_tau": p.observe_tau, "spin_chunks": spin_chunks,
        "rotated": d["rotate"], "family_details": p.details,
    }
    return Landscape(
        master_seed=int(master_seed), index=int(index), seed=d["seed"], family=d["family"],
        forced_side=frame.side("b"), split=split_of(d["seed"]), elevation=elevation.astype(np.float32),
        cell_size=d["cell"], sides=side_spec, closed_edges=closed, parameters=parameters,
        truth=truth.to_dict(), expected=frame.side(p.expected), dem_error=d["noise"],
        seconds=time.perf_counter() - started,
    )


# ---------------------------------------------------------------------------- cache and parallel runs
def cache_root() -> Path:
    """Where generated records are kept: ``$XDG_CACHE_HOME/divides/benchmark`` (default ``~/.cache``)."""
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "divides" / "benchmark"


def _cache_path(root: Path, master_seed: int, index: int, grid: tuple[int, int]) -> Path:
    return Path(root) / f"v{GENERATOR_VERSION}" / f"grid{grid[0]}-{grid[1]}" / f"seed{master_seed}" / f"{index:05d}.npz"


def load_or_build(master_seed: int, index: int, *, grid: tuple[int, int] = (120, 400),
                  cache_dir: str | Path | None = None) -> Landscape:
    """The cached record of a landscape, built and cached first if missing (``cache_dir=""``: no cache)."""
    if cache_dir == "":
        return build(master_seed, index, grid=grid)
    path = _cache_path(Path(cache_dir) if cache_dir is not None else cache_root(), master_seed, index, grid)
    if path.exists():
        return Landscape.load(path)
    landscape = build(master_seed, index, grid=grid)
    landscape.save(path)
    return landscape


def load_folder(folder: str | Path) -> list[Landscape]:
    """Every record (``*.npz``) in ``folder``, in index order (e.g. the frozen subset the tests use)."""
    paths = sorted(Path(folder).glob("*.npz"))
    if not paths:
        raise ParameterError(f"no benchmark records (*.npz) in {str(folder)!r}")
    return sorted((Landscape.load(p) for p in paths), key=lambda s: (s.master_seed, s.index))


def generate(n: int, *, seed: int = 0, workers: int = 1, grid: tuple[int, int] = (120, 400),
             cache_dir: str | Path | None = None,
             on_done: Callable[[Landscape], None] | None = None) -> list[Landscape]:
    """The first ``n`` landscapes of the benchmark drawn from ``seed``, in index order.

    Landscape ``i`` is of family ``FAMILIES[i % 14]``, forced on side b for
    even ``i // 14`` and on side a (mirror) for odd, so any 28 consecutive
    landscapes hold every family on either side.

    Parameters
    ----------
    n : int
        Number of landscapes (>= 1).
    seed : int
        Master seed (>= 0).
    workers : int
        Processes of a Dask ``LocalCluster`` (one thread each); 1 runs in
        this process.
    grid : (int, int)
        Range of rows and of columns.
    cache_dir : path, optional
        Cache folder (default :func:`cache_root`; ``""`` disables the cache).
    on_done : callable, optional
        Called with each landscape as it is finished (for progress).
    """
    if int(n) < 1 or int(workers) < 1:
        raise ParameterError(f"need n >= 1 landscapes and workers >= 1; got n = {n!r}, workers = {workers!r}")
    lo, hi = (int(v) for v in grid)
    if not (16 <= lo <= hi):
        raise ParameterError(f"grid range must be two sizes 16 <= lo <= hi cells; got {grid!r}")
    done: list[Landscape] = []
    if int(workers) == 1:
        for i in range(int(n)):
            done.append(load_or_build(seed, i, grid=(lo, hi), cache_dir=cache_dir))
            if on_done is not None:
                on_done(done[-1])
    else:
        import logging

        from dask.distributed import Client, LocalCluster, as_completed

        with LocalCluster(n_workers=int(workers), threads_per_worker=1, processes=True,
                          dashboard_address=None, silence_logs=logging.ERROR) as cluster, Client(cluster) as client:
            futures = [client.submit(load_or_build, seed, i, grid=(lo, hi), cache_dir=cache_dir, pure=False)
                       for i in range(int(n))]
            for future in as_completed(futures):
                done.append(future.result())
                if on_done is not None:
                    on_done(done[-1])
    return sorted(done, key=lambda s: s.index)

