"""Regional model landscapes for validating screening: one long main divide, truth measured per stretch.

Each case is a ridge between the west edge (side a) and the east edge (side
b), north and south edges closed, long along the divide (200–260 rows) so
that several outlet basins drain off either side. It is grown with
:func:`divides.model.simulate` to steady state (the single-divide
benchmark's spin-up, :func:`divides.model.benchmark._spin_up`, run on the
target relief's response time and again on the grown relief's), then one of
:data:`FAMILIES` changes part or all of the forcing, the surface is observed,
and the run is *continued* under the same forcing for
:data:`~divides.model.benchmark.WINDOW_TAU` response times while the divide
is tracked on every row (:mod:`divides.model.tracking`). The truth is
measured per *stretch* of the main divide (:data:`STRETCH_SHARE` of the rows
each) with the single-divide benchmark's rule: the least-squares rate of the
mean position over the rows that cross the divide at every record. For the
screening targets a stretch moves at :data:`STRETCH_MOVING_CELLS_PER_TAU` cells
per response time or more and does not move below
:data:`~divides.model.benchmark.MOVING_CELLS_PER_TAU` (:func:`stretch_class`).

The divides between neighbouring outlet basins that drain off the same edge
(lateral outlet-basin divides) are not crossed by the rows: their truth is the
area the two basins exchange over the same truth run
(:func:`lateral_truth`, :mod:`divides.model.outlet_exchange`), classed with the
same thresholds. It is measured by replaying the truth run from the cached
observed DEM (:func:`continuation_forcing`), and cached beside the cases.

Cases are reproducible from ``(master seed, index)``; the split into
training and held-out is the single-divide benchmark's
(:func:`divides.model.benchmark.split_of`: SHA-256 of the seed), fixed before
anything is generated. Records are cached under
``$XDG_CACHE_HOME/divides/regional`` (:func:`cache_root`).

:func:`score` checks a screening of a case against its truth (the targets of
docs/validation.md, *Regional screening*). It reads the screening's fields
only, so this room never imports the assessment.
"""

from __future__ import annotations

import json
import math
import os
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from divides.errors import ParameterError
from divides.io.dem import Dem
from divides.model.benchmark import (
    MOVING_CELLS_PER_TAU,
    STEPS_PER_TAU,
    WINDOW_TAU,
    Landscape,
    _chi_estimate,
    _spin_up,
    split_of,
)
from divides.model.scenarios import ridge_surface
from divides.model.simulate import simulate
from divides.model.tracking import edge_catchments
from divides.terrain.dem_error import DemError
from divides.terrain.line_gaps import line_gaps

__all__ = ["ERROR_STREAM", "FAMILIES", "LATERAL_MIN_CELLS", "LATERAL_MIN_LENGTH_CELLS", "READS_STEADY_SURFACE",
           "REGIONAL_VERSION", "STEADY_FAMILIES", "TARGETS", "RegionalCase", "azimuth_error", "build", "cache_root",
           "case_seed", "continuation_forcing", "lateral_truth", "load_or_build", "measure_lateral", "raises_alarm",
           "ranking_targets", "score", "segment_stretch_shares", "stretch_class", "stretch_motion"]

#: Bump whenever a range, family or step changes (cached cases of another version are not reused).
#: Version 3 settles the spin-up at the truth run's time step (:func:`_settle`).
REGIONAL_VERSION = 3

#: Random stream of the DEM error added to an observed surface (:meth:`RegionalCase.dem`).
ERROR_STREAM = 15

#: Settling (:func:`_settle`): response times between checks, and most checks after the first.
SETTLE_CHUNK_TAU = 2.0
MAX_SETTLE_CHUNKS = 10

#: Families in the order the cases cycle through them (case i is family i mod 8; forcing on b for
#: even i // 8, mirrored onto a for odd).
FAMILIES: tuple[str, ...] = (
    "partial_base_level_fall",
    "erodibility_patch",
    "runoff_gradient",
    "tilt",
    "steady_symmetric",
    "steady_uplift_contrast",
    "steady_erodibility_contrast",
    "steady_runoff_contrast",
)
STEADY_FAMILIES: tuple[str, ...] = FAMILIES[4:]

#: Ranges drawn per case (uniform unless noted).
RANGES: dict[str, tuple[float, float]] = {
    "rows": (200, 260),                  # along the main divide
    "cols": (150, 170),                  # across it
    "cell_m": (30.0, 90.0),
    "theta": (0.4, 0.6),                 # m / n; n = 1 (build's n)
    "uplift_m_per_yr": (2e-4, 1e-3),     # log-uniform
    "mean_flank_gradient": (0.05, 0.15),  # sets the target relief (as the single-divide benchmark)
    "hillslope_cells": (1.0, 3.0),       # log-uniform; D = U l^(1+2θ) / ks
    "observe_tau": (0.4, 1.0),           # after the change, in response times
}

#: Length of a stretch of the main divide on which the truth is measured, as a share of the rows.
STRETCH_SHARE = 0.1

#: A stretch counts as moving for the ranking targets at this many cells per response time or more, and
#: as not moving below MOVING_CELLS_PER_TAU (the single-divide benchmark's rule); in between it is "slow"
#: and in neither class. Steady controls' stretches drift back and forth at 1–5 cells per τ (their mean
#: at < 0.5), so one cell per τ on a stretch of a tenth of the divide is not yet a clear motion. Chosen
#: from the measured truth of training cases 1–5 before any of them was screened.
STRETCH_MOVING_CELLS_PER_TAU = 2.0

#: A screened segment's landscape evidence, kept per segment in the benchmark's results: those of
#: divides.assess.screen.EVIDENCE_KEYS (this room does not import screening; a test checks they match).
EVIDENCE_KEYS = ("forward_shift_cells", "forward_shift_basin_cells", "hilltop_contrast", "transience_a",
                 "transience_b", "transience_sd_a", "transience_sd_b", "neighbour_instability")

#: The targets of issue 14 item 4 (docs/validation.md, *Regional screening*).
TARGETS = {
    "top_in_moving_share": 0.7,   # top-ranked main-divide segments lie >= 70 % in moving stretches
    "azimuth_deg": 45.0,          # and point within 45° of the measured motion
    "alarm": 0.5,                 # no segment with instability >= 0.5 and confidence >= 0.5 when steady
    "coverage": 0.9,              # of the divides between outlet basins
}


def case_seed(master_seed: int, index: int) -> int:
    """The seed of regional case ``index`` (63-bit; another stream than the single-divide benchmark's)."""
    if int(master_seed) < 0 or int(index) < 0:
        raise ParameterError(f"regional seed and index must be integers >= 0; got {master_seed!r}, {index!r}")
    state = np.random.SeedSequence([int(master_seed), int(index), 14]).generate_state(2, np.uint32)
    return int((int(state[0]) << 31) ^ int(state[1]))


@dataclass(frozen=True, eq=False)
class RegionalCase:
    """One regional case: the observed DEM and the truth per stretch of its main divide.

    Attributes
    ----------
    master_seed, index, seed : int
    family : str
    forced_side : str
        ``"a"`` (west) or ``"b"`` (east).
    split : str
        ``"training"`` or ``"held-out"``.
    elevation : ndarray of float32
        The observed DEM (north-up).
    cell_size : float
    parameters : dict
        K, n, m, θ, U, D, τ and the family's own numbers.
    stretches : list of dict
        Per stretch of rows ``[row0, row1)``: ``rate_m_per_yr`` (positive: into b, east),
        ``moves_toward`` (``"a"``, ``"b"``, ``"stable"`` or None when fewer than three
        rows cross the divide throughout) and ``n_lines``.
    threshold_m_per_yr : float
        One cell per response time.
    seconds : float
    """

    master_seed: int
    index: int
    seed: int
    family: str
    forced_side: str
    split: str
    elevation: np.ndarray
    cell_size: float
    parameters: dict
    stretches: list
    threshold_m_per_yr: float
    seconds: float
    version: int = REGIONAL_VERSION

    closed_edges = ("north", "south")

    def dem(self, error: DemError | None = None) -> Dem:
        """The observed DEM; with ``error``, plus one field of that DEM error.

        The field is drawn from the case's own seed (stream :data:`ERROR_STREAM`), so it is the same on every
        call and independent of the draws a screening makes; the truth stays that of the surface without error
        (a real DEM is the ground plus its error).
        """
        z = self.elevation.astype(np.float64)
        if error is not None:
            rng = np.random.default_rng([self.seed, ERROR_STREAM])
            z += error.sample_grid(z.shape, self.cell_size, rng)
        return Dem.from_array(z, cell_size=self.cell_size, valid_range=None)

    @property
    def steady(self) -> bool:
        """A steady control (by family; the stretches say whether it measured stable)."""
        return self.family in STEADY_FAMILIES

    def to_meta(self) -> dict:
        """Everything but the elevation, JSON-ready."""
        return {k: v for k, v in self.__dict__.items() if k != "elevation"}

    #: Written as the single-divide benchmark's records (compressed ``.npz``, renamed into place).
    save = Landscape.save

    @classmethod
    def load(cls, path: Path | str) -> RegionalCase:
        """Read a record written by :meth:`save`."""
        with np.load(path, allow_pickle=False) as data:
            meta = json.loads(str(data["meta"]))
            elevation = data["elevation"]
        return cls(elevation=elevation, **meta)


# ---------------------------------------------------------------------------- forcing
def _crest_col(z: np.ndarray) -> np.ndarray:
    return np.argmax(z, axis=1)


def _east_of_crest(crest: np.ndarray, cols: int) -> np.ndarray:
    """Cells east of each row's crest column (``crest``: the steady surface's, canonical frame)."""
    return np.arange(cols)[None, :] > np.asarray(crest)[:, None]


def _plan(family: str, rng: np.random.Generator, shape: tuple[int, int], u0: float, k0: float):
    """Steady forcing, the change (a function of the steady surface) and the family's numbers.

    Canonical frame: side a west, side b east, forcing on b. ``change(z, crest)`` returns
    ``(new z, forcing)``; ``crest`` is the column of each row's crest on the steady surface.
    """
    rows, cols = shape
    edges = {"north": "closed", "south": "closed", "west": "open", "east": "open"}
    uniform = {"uplift": u0, "erodibility": k0, "runoff": None, "edges": edges}
    east_half = np.broadcast_to(np.arange(cols) / (cols - 1) > 0.5, shape)
    # the perturbed stretch: 40–60 % of the rows, at the north or the south end
    share = float(rng.uniform(0.4, 0.6))
    north = bool(rng.random() < 0.5)
    n_rows = int(round(share * rows))
    in_rows = np.zeros(rows, dtype=bool)
    in_rows[:n_rows] = True
    if not north:
        in_rows = in_rows[::-1].copy()
    details: dict[str, Any] = {"rows_share": share, "at": "north" if north else "south"}
    if family == "partial_base_level_fall":
        drop = float(rng.uniform(0.1, 0.3))
        details["drop_share_of_relief"] = drop

        def change(z, crest):
            z = z.copy()
            z[in_rows, -1] -= drop * float(np.nanmax(z) - np.nanmin(z))  # open edge cells hold the new level
            return z, uniform
        return uniform, change, details
    if family == "erodibility_patch":
        ratio = float(rng.uniform(2.0, 4.0))
        details["ratio"] = ratio

        def change(z, crest):
            k = np.where(_east_of_crest(crest, cols) & in_rows[:, None], k0 * ratio, k0)
            return z, {**uniform, "erodibility": k}
        return uniform, change, details
    if family == "runoff_gradient":
        ratio = float(rng.uniform(2.0, 4.0))
        details = {"ratio_at_end": ratio, "rising_toward": "north" if north else "south"}
        along = np.linspace(1.0, 0.0, rows) if north else np.linspace(0.0, 1.0, rows)

        def change(z, crest):
            r = np.where(_east_of_crest(crest, cols), 1.0 + (ratio - 1.0) * along[:, None], 1.0)
            return z, {**uniform, "runoff": r}
        return uniform, change, {k: v for k, v in details.items()}
    if family == "tilt":
        g = float(rng.uniform(0.3, 0.7))
        x = np.arange(cols) / (cols - 1)
        u = np.broadcast_to(u0 * (1.0 + g * (2.0 * x - 1.0)), shape).copy()
        return uniform, (lambda z, crest: (z, {**uniform, "uplift": u})), {"tilt": g}
    if family in STEADY_FAMILIES:
        ratio = float(rng.uniform(1.5, 3.0))
        fields = {
            "steady_symmetric": {},
            "steady_uplift_contrast": {"uplift": np.where(east_half, u0 * ratio, u0)},
            "steady_erodibility_contrast": {"erodibility": np.where(east_half, k0 * ratio, k0)},
            "steady_runoff_contrast": {"runoff": np.where(east_half, ratio, 1.0)},
        }[family]
        steady = {**uniform, **fields}
        return steady, (lambda z, crest: (z, steady)), ({"ratio": ratio} if fields else {})
    raise ValueError(f"unknown regional family {family!r}; families are {', '.join(FAMILIES)}")


def _mirror(forcing: dict) -> dict:
    """The forcing with west and east swapped (rasters flipped left-right)."""
    out = {k: (np.ascontiguousarray(v[:, ::-1]) if isinstance(v, np.ndarray) and v.ndim == 2 else v)
           for k, v in forcing.items() if k != "edges"}
    swap = {"west": "east", "east": "west"}
    out["edges"] = {swap.get(e, e): c for e, c in forcing["edges"].items()}
    return out


# ---------------------------------------------------------------------------- truth per stretch
def stretch_motion(positions: np.ndarray, times: np.ndarray, *, cell_m: float, tau_yr: float,
                   share: float = STRETCH_SHARE) -> tuple[list[dict], float]:
    """Measured motion of each stretch of a divide tracked per row.

    The single-divide benchmark's rule (:func:`divides.model.benchmark.measure_motion`)
    on each stretch of ``share`` of the rows: the least-squares rate of the mean position
    over the rows that cross the divide at every record; moving when
    |rate| >= MOVING_CELLS_PER_TAU cells per τ (positive: into b).
    """
    threshold = MOVING_CELLS_PER_TAU * cell_m / tau_yr
    n = positions.shape[1]
    k = max(1, int(round(1.0 / share)))
    edges = np.linspace(0, n, k + 1).round().astype(int)
    out = []
    for lo, hi in zip(edges[:-1], edges[1:]):
        pos = positions[:, lo:hi]
        keep = np.all(np.isfinite(pos), axis=0)
        if np.count_nonzero(keep) < 3:
            out.append({"row0": int(lo), "row1": int(hi), "rate_m_per_yr": None, "moves_toward": None,
                        "n_lines": int(np.count_nonzero(keep))})
            continue
        rate = float(np.polyfit(times, pos[:, keep].mean(axis=1), 1)[0])
        toward = "stable" if abs(rate) < threshold else ("b" if rate > 0 else "a")
        out.append({"row0": int(lo), "row1": int(hi), "rate_m_per_yr": rate, "moves_toward": toward,
                    "n_lines": int(np.count_nonzero(keep))})
    return out, threshold


# ---------------------------------------------------------------------------- building
def _draws(master_seed: int, index: int, shape: tuple[int, int] | None, n: float = 1.0) -> dict:
    """Every random draw of a case, in the order :func:`build` has always made them.

    Nothing here runs the model, so the forcing of a cached case can be rebuilt from its
    seed (:func:`continuation_forcing`). ``n`` (the slope exponent, not drawn) leaves every draw as it is:
    the concavity θ = m / n is drawn, and K is set so that the steady steepness is the same (K = U / ks^n).
    """
    seed = case_seed(master_seed, index)
    rng = np.random.default_rng(seed)
    family = FAMILIES[index % len(FAMILIES)]
    mirror = (index // len(FAMILIES)) % 2 == 1
    rows = int(rng.integers(RANGES["rows"][0], RANGES["rows"][1] + 1))
    cols = int(rng.integers(RANGES["cols"][0], RANGES["cols"][1] + 1))
    if shape is not None:
        rows, cols = (int(v) for v in shape)
        if rows < 30 or cols < 30:
            raise ParameterError(f"a regional case needs at least 30 x 30 cells; got {shape!r}")
    cell = float(rng.uniform(*RANGES["cell_m"]))
    theta = float(rng.uniform(*RANGES["theta"]))
    lo, hi = RANGES["uplift_m_per_yr"]
    u0 = float(math.exp(rng.uniform(math.log(lo), math.log(hi))))
    half = 0.5 * (cols - 1) * cell
    relief = float(rng.uniform(*RANGES["mean_flank_gradient"])) * half
    ks = relief / _chi_estimate(half, cell, theta)
    k0 = u0 / ks ** n
    lo, hi = RANGES["hillslope_cells"]
    ell = float(math.exp(rng.uniform(math.log(lo), math.log(hi)))) * cell
    physics = {"m": theta * n, "n": float(n), "diffusivity": u0 * ell ** (1.0 + 2.0 * theta) / ks}
    spin, change, details = _plan(family, rng, (rows, cols), u0, k0)
    ridge_seed = int(rng.integers(2**31))
    observe = float(rng.uniform(*RANGES["observe_tau"])) if family not in STEADY_FAMILIES else 0.0
    return {"seed": seed, "family": family, "mirror": mirror, "rows": rows, "cols": cols, "cell": cell,
            "theta": theta, "u0": u0, "k0": k0, "relief": relief, "physics": physics, "spin": spin,
            "change": change, "details": details, "ridge_seed": ridge_seed, "observe": observe,
            "flip": (lambda a: np.ascontiguousarray(a[:, ::-1])) if mirror else (lambda a: a),
            "frame": _mirror if mirror else (lambda f: f)}


def _settle(surface: Dem, forcing: dict, physics: dict, tau: float, cell: float) -> tuple[Dem, dict]:
    """Run under the steady forcing at the truth run's time step until the truth run sees every stretch still.

    The model's steady state depends on its time step (hillslope diffusion is split from incision), so a
    surface spun up at SPIN_STEPS_PER_TAU moves again once run at STEPS_PER_TAU: on a training case settled
    for 32 τ at the coarse step, the truth run moved stretches by up to 2.5 cells per τ. Each check is the
    truth run itself (:func:`_continue`, no change): the surface is settled once no stretch moves one cell
    per τ or more; between checks the run goes on for SETTLE_CHUNK_TAU response times.
    """
    steady = {**forcing, **physics}
    rates: list[float] = []
    for chunk in range(MAX_SETTLE_CHUNKS + 1):
        run = _continue(surface, steady, tau)
        stretches, threshold = stretch_motion(run.divide.positions, run.divide.times, cell_m=cell, tau_yr=tau)
        rates = [abs(s["rate_m_per_yr"]) / threshold for s in stretches if s["rate_m_per_yr"] is not None]
        if not rates or max(rates) < MOVING_CELLS_PER_TAU or chunk == MAX_SETTLE_CHUNKS:
            break
        more = (SETTLE_CHUNK_TAU - WINDOW_TAU) * tau
        surface = simulate(run.final, duration=more, dt=tau / STEPS_PER_TAU, **steady).final
    settled = bool(rates) and max(rates) < MOVING_CELLS_PER_TAU
    return surface, {"settle_chunks": chunk, "settled": settled,
                     "settle_max_cells_per_tau": float(max(rates)) if rates else None}


def _grow(master_seed: int, index: int, shape: tuple[int, int] | None,
          n: float = 1.0) -> tuple[dict, Dem, dict, float, dict]:
    """Spin-up, settling, change and observation: the draws, the observed surface, the forcing after the
    change, the response time and the growth's record (spin-up and settling chunks, the steady crest)."""
    d = _draws(master_seed, index, shape, n)
    rows, cols, cell, u0, relief = d["rows"], d["cols"], d["cell"], d["u0"], d["relief"]
    physics, flip, frame = d["physics"], d["flip"], d["frame"]
    start = ridge_surface((rows, cols), cell_size=cell, relief=0.3 * relief, noise=max(1.0, 0.01 * relief),
                          seed=d["ridge_seed"])
    sides = ("west", "east")
    # The grown relief is 2-5 times the target, so the response time is too: a first spin-up on the
    # target's τ, a second on the τ of the relief it grew (each stops once the divide drifts < 0.5 cell/τ),
    # both at the coarse spin-up step; then settling at the truth run's step (:func:`_settle`).
    surface, chunks = _spin_up(start, frame(d["spin"]), physics, relief / u0, sides)
    tau = float(np.nanmax(surface.elevation) - np.nanmin(surface.elevation)) / u0
    surface, more = _spin_up(surface, frame(d["spin"]), physics, tau, sides)
    tau = float(np.nanmax(surface.elevation) - np.nanmin(surface.elevation)) / u0
    # τ (and so the step) stays the one settled on: a step changed after settling would move the divide again
    surface, grown = _settle(surface, frame(d["spin"]), physics, tau, cell)
    z = surface.elevation
    crest = _crest_col(flip(z))
    grown = {"spin_chunks": chunks + more, **grown, "steady_crest_col": crest.tolist()}
    canonical, forcing = d["change"](flip(z), crest)
    forcing = {**frame(forcing), **physics}
    observe = d["observe"]
    surface = Dem.from_array(flip(canonical), cell_size=cell, valid_range=None)
    if observe > 0:
        steps = max(5, int(round(observe * STEPS_PER_TAU)))
        surface = simulate(surface, duration=observe * tau, dt=observe * tau / steps, **forcing).final
    return d, surface, forcing, tau, grown


def build(master_seed: int, index: int, *, shape: tuple[int, int] | None = None, n: float = 1.0) -> RegionalCase:
    """Build regional case ``index`` of ``master_seed`` (no cache): spin-up, change, observation, truth.

    ``shape`` replaces the drawn grid (rows, cols) and leaves every other draw as it is
    (small cases for fast tests); ``n``, the slope exponent of every run (1 in the benchmark's cases),
    too (:func:`_draws`).
    """
    started = time.perf_counter()
    d, surface, forcing, tau, grown = _grow(master_seed, index, shape, n)
    cell, u0, physics = d["cell"], d["u0"], d["physics"]
    run = _continue(surface, forcing, tau)
    stretches, threshold = stretch_motion(run.divide.positions, run.divide.times, cell_m=cell, tau_yr=tau)
    parameters = {"K": d["k0"], "n": physics["n"], "m": physics["m"], "theta": d["theta"], "U_m_per_yr": u0,
                  "D_m2_per_yr": physics["diffusivity"], "relief_m": float(np.nanmax(surface.elevation)
                                                                          - np.nanmin(surface.elevation)),
                  "tau_yr": tau, "observed_after_tau": d["observe"], **grown, "mirrored": d["mirror"],
                  "family_details": d["details"]}
    return RegionalCase(master_seed=int(master_seed), index=int(index), seed=d["seed"], family=d["family"],
                        forced_side="a" if d["mirror"] else "b", split=split_of(d["seed"]),
                        elevation=surface.elevation.astype(np.float32), cell_size=cell, parameters=parameters,
                        stretches=stretches, threshold_m_per_yr=threshold, seconds=time.perf_counter() - started)


def _continue(surface: Dem, forcing: dict, tau: float):
    """The truth run: WINDOW_TAU response times under ``forcing`` with the main divide tracked per row."""
    window = WINDOW_TAU * tau
    steps = int(WINDOW_TAU * STEPS_PER_TAU)
    return simulate(surface, duration=window, dt=window / steps, track=("west", "east"), **forcing)


#: Families whose change reads the steady surface (the crest the K patch or the runoff starts at): their
#: forcing is replayed from the steady crest kept in the record (grown again for records without it).
READS_STEADY_SURFACE = ("erodibility_patch", "runoff_gradient")


def continuation_forcing(case: RegionalCase) -> tuple[Dem, dict, float]:
    """The start, forcing and response time of a case's truth run, rebuilt from the case's seed.

    Every draw is replayed (:func:`_draws`); the families of :data:`READS_STEADY_SURFACE` read the
    crest of the steady surface, kept in the record (``steady_crest_col``). A record without it
    (regional version 2) is grown again (20–90 s), and its start is then the observed DEM in full
    precision; otherwise the start is the cached one (float32).
    """
    shape = tuple(case.elevation.shape)
    crest = case.parameters.get("steady_crest_col")
    n = float(case.parameters.get("n", 1.0))
    if case.family in READS_STEADY_SURFACE and crest is None:
        _, surface, forcing, tau, _ = _grow(case.master_seed, case.index, shape, n)
        return surface, forcing, tau
    d = _draws(case.master_seed, case.index, shape, n)
    canonical = d["flip"](case.elevation.astype(np.float64))
    _, forcing = d["change"](canonical, np.asarray(crest if crest is not None else _crest_col(canonical)))
    return case.dem(), {**d["frame"](forcing), **d["physics"]}, float(case.parameters["tau_yr"])


#: Outlet basins smaller than this (cells) are left out of the truth on lateral divides (the
#: validation's screening judges basins of 250 cells and more).
LATERAL_MIN_CELLS = 50

#: Bump when the truth on lateral divides changes (cached under ``lateral-v<k>``, beside the cases).
LATERAL_VERSION = 1


def measure_lateral(case: RegionalCase) -> dict:
    """Truth on the divides between neighbouring outlet basins: the run continued from the observed DEM.

    The truth run of :func:`build` is replayed from the cached observed DEM
    (:func:`continuation_forcing`), and the divide of every pair of neighbouring outlet
    basins (at least :data:`LATERAL_MIN_CELLS` cells; north and south edges closed)
    moves at the rate of :func:`divides.model.outlet_exchange.basin_exchange` between the
    observed and the continued DEM. The replayed run's own per-row stretches are kept
    (``stretches``) to check the replay against the case's.

    Returns
    -------
    dict
        ``labels`` (outlet basins of the observed DEM), ``edge`` (per label),
        ``pairs`` (per pair: ``basins``, ``length_m``, ``moved_m``, ``rate_m_per_yr``,
        positive into the second basin), ``stretches`` and ``seconds``.
    """
    from divides.model.outlet_exchange import basin_exchange, outlet_basins
    from divides.terrain.routing import route

    started = time.perf_counter()
    observed, forcing, tau = continuation_forcing(case)
    run = _continue(observed, forcing, tau)
    before, edge = outlet_basins(route(observed, closed_edges=case.closed_edges), min_cells=LATERAL_MIN_CELLS)
    after, _ = outlet_basins(route(run.final, closed_edges=case.closed_edges), min_cells=LATERAL_MIN_CELLS)
    pairs = basin_exchange(observed, before, after, years=WINDOW_TAU * tau)
    stretches, _ = stretch_motion(run.divide.positions, run.divide.times, cell_m=case.cell_size, tau_yr=tau)
    return {"labels": before, "edge": [str(e) for e in edge], "pairs": pairs, "stretches": stretches,
            "seconds": time.perf_counter() - started}


def lateral_truth(case: RegionalCase, *, cache_dir: str | Path | None = None) -> dict:
    """:func:`measure_lateral` of a case, cached under ``lateral-v<k>/v<regional>/seed<s>/<index>.npz``
    beside the cases (``cache_dir=""``: no cache); the cases' own records are left as they are."""
    if cache_dir == "":
        return measure_lateral(case)
    root = Path(cache_dir) if cache_dir is not None else cache_root()
    variant = exponent_variant(float(case.parameters.get("n", 1.0)))
    path = (root / f"lateral-v{LATERAL_VERSION}" / f"v{case.version}{variant}" / f"seed{case.master_seed}"
            / f"{case.index:04d}.npz")
    if path.exists():
        with np.load(path, allow_pickle=False) as data:
            meta = json.loads(str(data["meta"]))
            return {**meta, "labels": data["labels"]}
    out = measure_lateral(case)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.stem}.{os.getpid()}.tmp.npz")
    np.savez_compressed(tmp, labels=out["labels"], meta=np.array(json.dumps({k: v for k, v in out.items() if k != "labels"})))
    os.replace(tmp, path)
    return out


def cache_root() -> Path:
    """``$XDG_CACHE_HOME/divides/regional`` (default ``~/.cache``)."""
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "divides" / "regional"


def exponent_variant(n: float) -> str:
    """The cache folder's suffix of cases grown with slope exponent ``n`` ("" for the benchmark's n = 1).

    Examples
    --------
    >>> exponent_variant(1.0), exponent_variant(1.5)
    ('', '-n1.5')
    """
    return "" if float(n) == 1.0 else f"-n{float(n):g}"


def load_or_build(master_seed: int, index: int, *, cache_dir: str | Path | None = None,
                  n: float = 1.0) -> RegionalCase:
    """The cached case, built and cached first if missing (``cache_dir=""``: no cache); ``n`` as :func:`build`."""
    if cache_dir == "":
        return build(master_seed, index, n=n)
    root = Path(cache_dir) if cache_dir is not None else cache_root()
    path = root / f"v{REGIONAL_VERSION}{exponent_variant(n)}" / f"seed{int(master_seed)}" / f"{int(index):04d}.npz"
    if path.exists():
        return RegionalCase.load(path)
    case = build(master_seed, index, n=n)
    case.save(path)
    return case


# ---------------------------------------------------------------------------- scoring a screening
def stretch_class(stretch: dict, threshold_m_per_yr: float) -> str | None:
    """``"a"`` or ``"b"`` (moving at :data:`STRETCH_MOVING_CELLS_PER_TAU` or more), ``"stable"`` (below
    one cell per τ), ``"slow"`` (in between) or None (not measured)."""
    rate = stretch["rate_m_per_yr"]
    if rate is None:
        return None
    ratio = abs(rate) / threshold_m_per_yr  # the threshold is one cell per τ
    if ratio < MOVING_CELLS_PER_TAU:
        return "stable"
    if ratio < STRETCH_MOVING_CELLS_PER_TAU:
        return "slow"
    return "b" if rate > 0 else "a"


def segment_stretch_shares(line, stretches: list[dict], threshold: float) -> dict[str, float]:
    """Share of a divide line's length in stretches moving toward a or b, stable, slow or unmeasured
    (:func:`stretch_class`).

    Each piece between two vertices counts for the stretch of its mid-point's row.
    """
    out = {"a": 0.0, "b": 0.0, "stable": 0.0, "slow": 0.0, None: 0.0}
    if line.x.size < 2 or line.length_m <= 0:
        return out
    mid = 0.5 * (line.row[1:] + line.row[:-1])
    step = np.diff(line.distance_m)
    starts = np.array([s["row0"] for s in stretches])
    which = np.clip(np.searchsorted(starts, np.floor(mid + 0.5), side="right") - 1, 0, len(stretches) - 1)
    for k, s in enumerate(stretches):
        out[stretch_class(s, threshold)] += float(step[which == k].sum())
    total = float(step.sum())
    return {k: v / total for k, v in out.items()}


def _edge_of_labels(flow, labels: np.ndarray) -> np.ndarray:
    """1 for a basin label draining off the west edge, 2 off the east, 0 otherwise."""
    code = edge_catchments(flow, ("west", "east")).ravel()
    lab = labels.ravel()
    out = np.zeros(int(lab.max()) + 1, dtype=np.int8)
    for e in (1, 2):
        out[np.unique(lab[code == e])] = e
    out[0] = 0
    return out


#: A lateral divide shorter than this (cells) has no truth: one cell changing hands over the truth run
#: would read a third of the not-moving limit on it (set before any screening was scored against it).
LATERAL_MIN_LENGTH_CELLS = 10

#: Main segments whose lines come within this many cells of each other are recorded as neighbours
#: (:func:`score`), the widest gap a ranking of round 34 reads (docs/validation.md, *Regional screening*).
NEIGHBOUR_RECORD_CELLS = 10.0


def _lateral_rows(case: RegionalCase, screening, lateral: dict) -> list[dict]:
    """Segments between neighbouring outlet basins draining off the same edge, with the truth of their pair."""
    from divides.model.outlet_exchange import match_labels

    to_truth = match_labels(screening.labels, lateral["labels"], int(screening.labels.max()))
    edge = lateral["edge"]
    pairs = {tuple(p["basins"]): p for p in lateral["pairs"]}
    out = []
    for s in screening.segments:
        ta, tb = (int(to_truth[v]) for v in s["basins"])
        if not ta or not tb or ta == tb or edge[ta] != edge[tb] or edge[ta] not in ("west", "east"):
            continue
        p = pairs.get((min(ta, tb), max(ta, tb)))
        truth = None
        if p is not None and p["rate_m_per_yr"] is not None \
                and p["length_m"] >= LATERAL_MIN_LENGTH_CELLS * case.cell_size:
            truth = stretch_class(p, case.threshold_m_per_yr)  # "b": into the pair's second basin
            if truth in ("a", "b") and ta > tb:
                truth = {"a": "b", "b": "a"}[truth]
        out.append({"rank": s["rank"], "instability": s["instability"], "ranking_score": s.get("ranking_score"),
                    "confidence": s["confidence"], "motion_probability": s.get("motion_probability"),
                    "probabilities": s.get("probabilities"),
                    "kind": s.get("divide_kind"), "length_m": s["length_m"],
                    **{k: s.get(k) for k in EVIDENCE_KEYS},
                    "verdict": s.get("verdict"), "truth": truth, "in_moving": truth in ("a", "b"),
                    "in_stable": truth == "stable",
                    "rate_cells_per_tau": None if p is None or p["rate_m_per_yr"] is None
                    else p["rate_m_per_yr"] / case.threshold_m_per_yr})
    return out


def score(case: RegionalCase, screening, *, top: int = 3, lateral: dict | None = None) -> dict:
    """The targets of a screening of ``case`` against its measured truth.

    Main-divide segments are those between a basin draining west and one
    draining east. A segment is *in a moving stretch* when at least
    ``TARGETS["top_in_moving_share"]`` of its length lies in moving stretches and
    *in a stable stretch* when that share lies in stable ones.

    Returns
    -------
    dict
        ``coverage``; ``alarms`` (segments with instability and confidence both >=
        0.5); for cases with moving stretches: ``top`` (the highest-ranked
        min(``top``, moving segments) main-divide segments, each with its share in
        moving stretches, its azimuth and the azimuth of the measured motion) and
        ``top_ok``; ``order_ok`` (every main segment in a stable stretch ranks below
        every one in a moving stretch) and ``order_violations``. With ``lateral``
        (:func:`lateral_truth`): ``lateral``, the segments between neighbouring outlet
        basins draining off the same edge with the truth of their pair (``truth``:
        ``"a"``, ``"b"``, ``"stable"``, ``"slow"`` or None), and the counts of them.
    """
    edge = _edge_of_labels(screening.flow, screening.labels)
    share = TARGETS["top_in_moving_share"]
    main, lines = [], []
    for s in screening.segments:
        a, b = s["basins"]
        if {int(edge[a]), int(edge[b])} != {1, 2}:
            continue
        lines.append(s["line"])
        sh = segment_stretch_shares(s["line"], case.stretches, case.threshold_m_per_yr)
        moving = sh["a"] + sh["b"]
        toward = "a" if sh["a"] >= sh["b"] else "b"
        main.append({"rank": s["rank"], "instability": s["instability"], "ranking_score": s.get("ranking_score"),
                     "confidence": s["confidence"],
                     "motion_probability": s.get("motion_probability"), "kind": s.get("divide_kind"),
                     "verdict": s.get("verdict"),
                     "probabilities": s.get("probabilities"), "judged_length_m": s.get("judged_length_m"),
                     **{k: s.get(k) for k in EVIDENCE_KEYS},
                     "reason": s.get("reason"),
                     "n_points": s.get("n_points"), "facing_share": s.get("facing_share"),
                     "length_m": s["length_m"], "moving_share": moving, "stable_share": sh["stable"],
                     "measured_azimuth": 270.0 if toward == "a" else 90.0,
                     "b_side": "west" if int(edge[b]) == 1 else "east",  # the map side of the screening's side b
                     "azimuth": s["motion_azimuth_deg"], "in_moving": moving >= share,
                     "in_stable": sh["stable"] >= share})
    _record_neighbours(main, lines)
    main.sort(key=lambda m: m["rank"])
    alarms = [s for s in screening.segments if raises_alarm(s)]
    classes = [stretch_class(s, case.threshold_m_per_yr) for s in case.stretches]
    moving_truth = any(c in ("a", "b") for c in classes)
    out: dict[str, Any] = {
        "master_seed": case.master_seed, "index": case.index, "family": case.family, "split": case.split,
        "forced_side": case.forced_side,
        "moving_stretches": sum(c in ("a", "b") for c in classes),
        "stable_stretches": sum(c == "stable" for c in classes),
        "stretches": len(case.stretches), "coverage": screening.coverage.get("share"),
        "screened_area_share": screening.coverage.get("screened_area_share"),
        "segments": len(screening.segments), "main_segments": len(main),
        "alarms": len(alarms), "max_alarm": max((s["instability"] for s in alarms), default=None),
        "alarms_main": sum(1 for m in main if raises_alarm(m)),
        "main_insufficient": sum(1 for m in main if m["instability"] is None),
    }
    out["main"] = main
    out["alarms_by_kind"] = {k: sum(1 for s in alarms if s.get("divide_kind") == k) for k in ("main", "lateral")}
    if lateral is not None:
        lat = _lateral_rows(case, screening, lateral)
        out["lateral"] = lat
        out["lateral_segments"] = len(lat)
        out["lateral_moving"] = sum(m["in_moving"] for m in lat)
        out["lateral_stable"] = sum(m["in_stable"] for m in lat)
        out["lateral_alarms"] = sum(1 for m in lat if raises_alarm(m))
    out["others"] = [{k: s.get(k) for k in ("rank", "instability", "ranking_score", "motion_probability", "confidence",
                                            "probabilities", "length_m",
                                            "judged_length_m", "n_points", "facing_share", "divide_kind",
                                            "verdict", *EVIDENCE_KEYS)}
                     for s in screening.segments if {int(edge[s["basins"][0]]), int(edge[s["basins"][1]])} != {1, 2}]
    out["coverage_ok"] = out["coverage"] is not None and out["coverage"] >= TARGETS["coverage"]
    out["alarm_ok"] = (not case.steady) or not alarms
    out.update(ranking_targets(main, moving_truth=moving_truth, top=top))
    return out


def _record_neighbours(main: list[dict], lines: list) -> None:
    """Each main segment's ``neighbours``: [rank, gap in cells] of the other main segments whose lines come within
    :data:`NEIGHBOUR_RECORD_CELLS` of its own (:func:`divides.terrain.line_gaps.line_gaps`), for rescoring rankings
    that read them."""
    for m in main:
        m["neighbours"] = []
    for i, j, gap in zip(*line_gaps(lines, NEIGHBOUR_RECORD_CELLS)):
        main[i]["neighbours"].append([main[j]["rank"], round(float(gap), 2)])
        main[j]["neighbours"].append([main[i]["rank"], round(float(gap), 2)])


def raises_alarm(segment: dict) -> bool:
    """Instability and confidence both at least ``TARGETS["alarm"]`` (an alarm in a steady landscape)."""
    return all(segment[k] is not None and segment[k] >= TARGETS["alarm"] for k in ("instability", "confidence"))


def azimuth_error(m: dict) -> float | None:
    """Degrees between a main segment's ``azimuth`` and its ``measured_azimuth`` (0–180; None without a direction).

    Examples
    --------
    >>> azimuth_error({"azimuth": 350.0, "measured_azimuth": 90.0}), azimuth_error({"azimuth": None})
    (100.0, None)
    """
    if m["azimuth"] is None:
        return None
    return abs((m["azimuth"] - m["measured_azimuth"] + 180.0) % 360.0 - 180.0)


def ranking_targets(main: list[dict], *, moving_truth: bool, top: int = 3) -> dict:
    """The top and order targets of one case from its main-divide segments in rank order (:func:`score`).

    Each segment needs ``rank``, ``in_moving``, ``in_stable``, ``azimuth`` and ``measured_azimuth``;
    the first min(``top``, segments in moving stretches) get ``azimuth_error``. Returns ``top`` (those
    segments), ``top_ok`` (None without a moving stretch; False where stretches move but no main segment lies in
    one, as where the screening judged none there: nothing it ranks points at the motion), ``moving_segments``,
    ``stable_segments``, ``order_violations`` and ``order_ok`` (None without both kinds).

    Examples
    --------
    >>> still = {"rank": 1, "in_moving": False, "in_stable": True, "azimuth": None, "measured_azimuth": 90.0}
    >>> ranking_targets([still], moving_truth=True)["top_ok"], ranking_targets([], moving_truth=True)["top_ok"]
    (False, False)
    >>> ranking_targets([still], moving_truth=False)["top_ok"] is None
    True
    """
    out: dict[str, Any] = {}
    n_moving = sum(m["in_moving"] for m in main)
    if moving_truth and not n_moving:  # before 5 December 2026 such a case was left out of the top target
        out["top"], out["top_ok"] = [], False
    elif moving_truth:
        head = main[: min(top, n_moving)]
        for m in head:
            m["azimuth_error"] = azimuth_error(m)
        out["top"] = [{k: m[k] for k in ("rank", "instability", "confidence", "moving_share", "azimuth",
                                         "measured_azimuth", "azimuth_error")} for m in head]
        out["top_ok"] = all(m["in_moving"] and m["azimuth_error"] is not None
                            and m["azimuth_error"] <= TARGETS["azimuth_deg"] for m in head)
    else:
        out["top"], out["top_ok"] = [], None
    movers = [m for m in main if m["in_moving"]]
    still = [m for m in main if m["in_stable"]]
    out["moving_segments"], out["stable_segments"] = len(movers), len(still)
    if movers and still:
        out["order_violations"] = sum(1 for m in movers for s in still if s["rank"] < m["rank"])
        out["order_ok"] = max(m["rank"] for m in movers) < min(s["rank"] for s in still)
    else:
        out["order_violations"], out["order_ok"] = 0, None
    return out
