"""`assess`: the whole question for one divide, from DEM to verdict."""

from __future__ import annotations

import contextvars
import dataclasses
import threading
from collections.abc import Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, field

import numpy as np

from divides._jsonable import to_jsonable
from divides.assess.contrasts import (
    MIN_SAMPLES,
    SPREAD_RATIO,
    Contrast,
    DivideSamples,
    block_bootstrap_mean,
    compute_contrasts,
    divide_samples,
)
from divides.assess.equilibrium import EquilibriumDivide, equilibrium_divide
from divides.assess.points import DividePoints, NearDivideFields, near_divide_fields, sample_divide
from divides.assess.missing_data import (filled_divide_note, interior_nodata_note, raster_holes_cells,
                                         raster_holes_note)
from divides.assess.rate import (
    PLAUSIBLE_MM_PER_YR,
    Calibration,
    calibrate,
    divide_rate,
    FORWARD_RATE_LOG_BIAS,
    FORWARD_RATE_LOG_SPREAD,
    exponent_samples,
    forward_erodibility,
    near_divide_erosion,
    step_celerity,
)
from divides.assess.verdict import (
    CAUTION,
    FORWARD_NOISE_CELLS,
    INSUFFICIENT_HELP,
    Verdict,
    decide,
    decision_model,
    right_share,
)
from divides.config import AssessConfig
from divides.errors import ParameterError, SideError
from divides.io.dem import Dem
from divides.model.forward_run import FORWARD_HORIZON_TAU, ForwardShift, forward_shift
from divides.profiles.analysis import ProfileAnalysis, analyse_profiles
from divides.profiles.chi import ChiWeights, chi_weights
from divides.terrain.channels import Channels, extract_channels
from divides.terrain.dem_error import DemError
from divides.terrain.divide_lines import Divide, divide_between
from divides.terrain.routing import FlowGraph, route
from divides.terrain.sides import BaseLevel, Sides, common_base_level, parse_side, resolve_sides
from divides.terrain.tiled_flow import active_plan
from divides.terrain.voids import VoidFill, fill_voids

__all__ = ["Assessment", "assess", "SCHEMA"]

SCHEMA = "divides.assessment/1"


@dataclass(eq=False)
class Assessment:
    """Everything the verdict on one divide rests on.

    Attributes
    ----------
    config : AssessConfig
    dem, flow, channels, sides, base, divide, profiles, points :
        The intermediate results (see their classes).
    contrasts : list of Contrast
    verdict : Verdict
    calibration : Calibration
    rate : dict or None
        ``low``, ``best``, ``high`` migration rate (mm/yr) toward the victim, and flags
        (None when no calibration is given or the rate is withheld).
    knickpoints : list of dict
        Significant knickpoints with their arrival times at the divide.
    equilibrium : EquilibriumDivide
    robustness : list of dict
        Each perturbed re-run: what was changed and the verdict it gave.
    automatic : dict
        Parameters chosen by the tool (θ, thresholds, spacing...).
    rate_withheld : str or None
        Why no rate is given although erosion is calibrated (its direction disagrees with the
        verdict, or the verdict has none).
    forward_rate : dict or None
        The forward run's rate of the divide under the calibrated K (``low``, ``best``, ``high`` mm/yr,
        ``toward``), or why it is withheld; None without a forward run or a calibration.
    rate_at_divide : dict or None
        The rate from crest kinematics at the divide (near-divide erosion and flank gradients), or why
        it is withheld; ``rate`` is the forward run's when that gives one, else this.
    forward_run : ForwardShift or None
        The forward run from the DEM (None when it was not made).
    voids : VoidFill
        The holes of nodata inside the DEM's data and whether they were filled
        (:func:`divides.terrain.voids.fill_voids`; ``dem`` is the filled DEM).
    """

    config: AssessConfig
    dem: Dem
    flow: FlowGraph
    channels: Channels
    sides: Sides
    base: BaseLevel
    divide: Divide
    profiles: ProfileAnalysis
    points: DividePoints
    contrasts: list
    verdict: Verdict
    calibration: Calibration
    rate: dict | None
    knickpoints: list
    equilibrium: EquilibriumDivide
    robustness: list = field(default_factory=list)
    automatic: dict = field(default_factory=dict)
    rate_withheld: str | None = None
    forward_rate: dict | None = None
    rate_at_divide: dict | None = None
    forward_run: ForwardShift | None = None
    voids: VoidFill = VoidFill()

    @property
    def summary(self) -> dict:
        """The ``summary.json`` document (schema ``divides.assessment/1``)."""
        return self.to_dict()

    def write(self, out_dir, *, overwrite: bool = False, progress=None):
        """Write every output (summary.json, verdict.txt, report.html, figures, layers, rasters, tables).

        Writing is atomic: files go to a temporary directory beside ``out_dir``
        that replaces it only when everything is written. An existing
        ``out_dir`` is refused unless ``overwrite``. Returns the output path.
        """
        import divides  # the public package: writing is the report room's (divides.write), never imported here

        return divides.write(self, out_dir, overwrite=overwrite, progress=progress)

    def to_dict(self) -> dict:
        """JSON-ready summary following the output contract of the design."""
        dem = self.dem
        theta_est = self.profiles.concavity.get("both")
        theta_ci = theta_est.ci95 if (theta_est is not None and self.profiles.theta_source == "collinearity") \
            else (None, None)
        sides = {}
        for name, side, kept in (("a", self.sides.a, self.base.kept_a), ("b", self.sides.b, self.base.kept_b)):
            sides[name] = {
                "spec": side.spec.text,
                "name": getattr(self.config, f"name_{name}") or f"side {name}",
                "area_km2": side.area_m2 / 1e6,
                "n_channel_heads": int(np.count_nonzero(kept & (self.channels.n_donors == 0))),
                "base_level_m": self.base.elevation_m,
                "lowest_channel_m": self.base.lowest_a_m if name == "a" else self.base.lowest_b_m,
                "networks": self.base.networks.get(name, {}),
                "snapped_points": side.snapped,
            }
        rate = None if self.rate is None else {k: self.rate[k] for k in ("low", "best", "high")}
        at_divide = None if self.rate_at_divide is None else {
            k: v for k, v in self.rate_at_divide.items() if k in ("low", "best", "high", "toward", "withheld")}
        return to_jsonable({
            "schema": SCHEMA,
            "dem": {"path": dem.path, "crs": None if dem.crs is None else dem.crs.to_string(),
                    "shape": list(dem.shape), "cell_size_m": list(dem.cell_size_m), "geographic": dem.geographic,
                    "interior_nodata_cells": self.voids.cells, "voids": self.voids.to_dict()},
            "parameters": {**self.config.to_dict(), **self.automatic},
            "sides": sides,
            "divide": {**self.divide.summary(), "n_samples": self.points.size, "saddles": self.divide.saddles,
                       "filled_share": _filled_share(self.voids, self.divide)},
            "profiles": {
                "theta": {"value": self.profiles.theta, "ci95": list(theta_ci),
                          "method": self.profiles.theta_source},
                "ksn": {"a": self.profiles.median_ksn("a"), "b": self.profiles.median_ksn("b")},
                "ksn_slope_area": {"a": self.profiles.median_ksn("a", source="slope_area"),
                                   "b": self.profiles.median_ksn("b", source="slope_area")},
                "concavity": {k: v.to_dict() for k, v in self.profiles.concavity.items()},
                "n_streams": len(self.profiles.streams),
            },
            "contrasts": [c.to_dict() for c in self.contrasts],
            "knickpoints": [
                {k: kp[k] for k in ("side", "x", "y", "elevation_m", "distance_to_divide_m", "arrival_years",
                                    "kind", "delta_ksn", "step_m", "p_value", "q_value", "chi", "chi_base", "area_m2",
                                    "celerity_note")}
                | {"celerity_defined": bool(kp["celerity_defined"])}
                for kp in self.knickpoints
            ],
            "equilibrium": self.equilibrium.summary(),
            "robustness": {"share_kept": self.verdict.robustness_share, "runs": self.robustness},
            "calibration": {"source": self.calibration.source, "notes": self.calibration.notes},
            "conditioning": self.flow.conditioned.summary(),
            "verdict": {
                "moves_toward": self.verdict.moves_toward,
                "aggressor": self.verdict.aggressor,
                "confidence": self.verdict.confidence,
                "probabilities": self.verdict.probabilities,
                "min_confidence": self.verdict.min_confidence,
                "rate_mm_per_yr": rate,
                "basis": self.verdict.basis,
                "near_divide_probabilities": self.verdict.near_divide_probabilities,
                "forward_run": {
                    "shift_cells": None if self.verdict.forward_shift_cells is None
                    else round(self.verdict.forward_shift_cells, 3),
                    "horizon_response_times": FORWARD_HORIZON_TAU,
                    "rate_mm_per_yr": self.forward_rate,
                    "note": "; ".join(self.verdict.notes),
                },
                "long_run_tendency": self.verdict.long_run,
                "rate_flags": ([self.rate_withheld] if self.rate_withheld else [])
                + ([] if self.rate is None else self.rate["flags"]),
                "rate_withheld": self.rate_withheld,
                "rate_method": None if self.rate is None else self.rate["method"],
                "rate_at_divide_mm_per_yr": at_divide,
                "erosion_near_divide_mm_yr": None if self.rate is None or "erosion_a_mm_yr" not in self.rate else
                {k: self.rate[f"erosion_{k}_mm_yr"] for k in ("a", "b")},
                "text": self.verdict.text,
                "reason": self.verdict.reason,
                "caution": CAUTION,
            },
        })


@dataclass(frozen=True)
class _Core:
    """One pass of the analysis (shared by the main run and the robustness re-runs)."""

    flow: FlowGraph
    channels: Channels
    sides: Sides
    base: BaseLevel
    divide: Divide
    profiles: ProfileAnalysis
    points: DividePoints
    contrasts: list
    spacing_m: float
    reference_area_m2: float
    block_points: int
    samples: DivideSamples
    dem_error: DemError
    fields: NearDivideFields | None = None  # reused by re-runs on the same DEM and flow

    @property
    def same_channel(self) -> bool:
        """Channel elevation is read at the channel threshold (it then mirrors hillslope relief)."""
        return bool(np.isclose(self.reference_area_m2, self.channels.threshold.value_m2))

    def decide(self, config: AssessConfig, robustness_share: float | None = None,
               forward_shift: float | None = None) -> Verdict:
        """The verdict of this pass (see :func:`divides.assess.verdict.decide`)."""
        return _decide(self.contrasts, self.same_channel, config, robustness_share, forward_shift)


def _decide(contrasts: list, same_channel: bool, config: AssessConfig, robustness_share: float | None = None,
            forward_shift: float | None = None) -> Verdict:
    return decide(contrasts, robustness_share=robustness_share, same_channel=same_channel,
                  min_confidence=config.min_confidence, forward_shift=forward_shift,
                  forward_in_decision=config.forward_in_decision)


def _core(
    dem: Dem,
    side_a: str,
    side_b: str,
    config: AssessConfig,
    *,
    lonlat: bool,
    theta: float | str,
    channel_area_m2: float | None,
    weights_fn,
    n_boot_theta: int,
    flow: FlowGraph | None = None,
    fields: NearDivideFields | None = None,
    step=None,
    chi_only: bool = False,
    on_channels=None,
) -> _Core:
    step = step or (lambda text: None)
    if flow is None:
        step("routing flow (conditioning, D8, drainage area)")
        flow = route(dem, conditioning=config.conditioning, sea_level=config.sea_level_m,
                     closed_edges=config.closed_edges)
    step("channels, sides and the common base level")
    channels = extract_channels(flow, threshold_m2=channel_area_m2)
    if on_channels is not None:
        on_channels(channels)
    sides = resolve_sides(flow, parse_side(side_a, lonlat=lonlat), parse_side(side_b, lonlat=lonlat),
                          snap_radius_m=config.snap_radius_m)
    base = common_base_level(channels, sides, elevation_m=config.base_level_m)
    divide = divide_between(dem, sides.a.mask, sides.b.mask)
    if not divide.lines:
        raise SideError("the two sides touch only at isolated cells: no divide line could be traced")
    weights = weights_fn(flow)
    cell = float(np.max(dem.cell_size_m))
    dem_error = config.dem_error(cell)
    step("river profiles (χ, concavity, ksn, knickpoints)")
    profiles = analyse_profiles(channels, sides, base, theta=theta, a0=config.a0_m2, weights=weights,
                                vertical_resolution_m=max(config.dem_error_m, 0.0), n_boot=n_boot_theta,
                                seed=config.seed, dem_error=dem_error, n=config.n, chi_only=chi_only)
    spacing = config.divide_spacing_m or 2.0 * cell
    reference = config.reference_area_m2 or channels.threshold.value_m2
    step("contrasts across the divide")
    if fields is None:  # gradient and local relief upstream: read off the DEM and the flow paths only
        fields = near_divide_fields(flow, config.relief_radius_m)
    try:
        points = sample_divide(flow, divide, spacing_m=spacing, channel_area_m2=channels.threshold.value_m2,
                               reference_area_m2=reference, chi_grid=profiles.grid(profiles.chi),
                               relief_radius_m=config.relief_radius_m, fields=fields)
    except ValueError as exc:  # no divide line long enough for one sample
        raise SideError(f"the divide between the two sides is too short to sample ({exc}); choose sides "
                        "that share a longer divide") from exc
    block_points = max(1, int(round((config.block_m or 10 * spacing) / spacing)))
    samples = divide_samples(points)
    mirrored = bool(np.isclose(reference, channels.threshold.value_m2))
    contrasts = compute_contrasts(points, block_points=block_points, n_boot=config.n_bootstrap,
                                  base_level_m=base.elevation_m, seed=config.seed, dem_error=dem_error, cell_m=cell,
                                  mirrored=mirrored, samples=samples)
    return _Core(flow, channels, sides, base, divide, profiles, points, contrasts, spacing, reference, block_points,
                 samples, dem_error, fields)


#: θ accepted by χ (0 < θ <= 2); robustness re-runs stay inside it.
_THETA_RANGE = (0.05, 2.0)

#: Re-runs by what they can change: θ changes χ only (near-divide metrics are read off the DEM
#: and the flow paths, which θ does not touch); DEM noise and the channel threshold change all.
_CAN_CHANGE = {"noise": "all", "area": "all", "theta": "chi"}


class _NoiseRuns:
    """The robustness re-runs on DEMs with drawn noise, on a thread beside the main pass.

    They read only θ and the channel threshold of the main pass, so with a numeric θ they start as
    soon as the main channels are known and run while the main pass analyses its profiles and makes
    the forward run and the other re-runs: their routing and most of their work are numba kernels
    that release the GIL, which puts them on the second core. The noise grids are drawn in the same
    sequence, one run after the other, so every run is the one the serial order made. Each run keeps
    only what its verdict reads (its contrasts), not its grids.
    """

    def __init__(self, dem: Dem, side_a: str, side_b: str, config: AssessConfig, *, lonlat: bool, weights_fn) -> None:
        self._args = (dem, side_a, side_b, config)
        self._lonlat = lonlat
        self._weights_fn = weights_fn
        self.count = config.n_noise_runs if config.robustness and config.dem_error_m > 0 else 0
        self._key: tuple[float, float] | None = None
        self._future: Future | None = None
        self._pool: ThreadPoolExecutor | None = None
        self._stop = threading.Event()

    def start(self, theta: float, threshold_m2: float) -> None:
        """Start the runs for θ and the channel threshold (no-op when started for them already)."""
        if self.count == 0 or self._key == (theta, threshold_m2):
            return
        self.close()
        self._stop = threading.Event()
        self._key = (theta, threshold_m2)
        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="divides-noise-runs")
        # the thread sees the caller's context (a tiled-routing plan lives in a context variable)
        self._future = self._pool.submit(contextvars.copy_context().run, self._run_all, theta, threshold_m2)

    def results(self, theta: float, threshold_m2: float) -> list:
        """Per run, (contrasts, same_channel) or the SideError it ended with; waits for the thread."""
        if self.count == 0:
            return []
        self.start(theta, threshold_m2)
        return self._future.result()

    def close(self) -> None:
        """Stop after the current run and wait for the thread (the main pass failed, or it is done)."""
        self._stop.set()
        if self._pool is not None:
            self._pool.shutdown(wait=True)
        self._pool = self._future = self._key = None

    def _run_all(self, theta: float, threshold_m2: float) -> list:
        dem, side_a, side_b, config = self._args
        quick = _quick(config)
        dem_error = config.dem_error(float(np.max(dem.cell_size_m)))
        rng = np.random.default_rng(config.seed + 1)
        out = []
        for _ in range(self.count):
            if self._stop.is_set():
                break
            run_dem = _perturbed(dem, dem_error, rng)
            try:
                run = _core(run_dem, side_a, side_b, quick, lonlat=self._lonlat, theta=theta,
                            channel_area_m2=threshold_m2, weights_fn=self._weights_fn, n_boot_theta=0,
                            chi_only=True)  # the verdict reads the contrasts only: no segments or knickpoints
                out.append((run.contrasts, run.same_channel))
            except SideError as exc:  # e.g. the noise leaves a side without channels
                out.append(exc)
            run = run_dem = None
        return out


def _perturbed(dem: Dem, dem_error: DemError, rng: np.random.Generator) -> Dem:
    """The DEM plus one draw of its spatially correlated error field (nodata stays nodata)."""
    spacing = (float(np.median(dem.dy)), float(np.median(dem.dx)))
    z = dem.elevation + dem_error.sample_grid(dem.shape, spacing, rng, dtype=dem.elevation.dtype)
    return dataclasses.replace(dem, elevation=np.where(dem.valid, z, np.nan).astype(dem.elevation.dtype))


def _quick(config: AssessConfig) -> AssessConfig:
    """The settings of a robustness re-run: a quarter of the bootstrap resamples (at least 100)."""
    return dataclasses.replace(config, n_bootstrap=max(100, config.n_bootstrap // 4))


def _robustness(dem, side_a, side_b, config, core: _Core, *, lonlat, weights_fn, forward_shift: float | None,
                step=None, noise: _NoiseRuns | None = None) -> tuple[list[dict], float]:
    """Re-run on perturbed inputs; return each run and the share keeping the main verdict.

    Only re-runs that can change the features the verdict rests on count toward the share:
    θ changes χ only, so θ re-runs are made only when the decision model reads χ
    (:data:`_CAN_CHANGE`). The share is reported beside the calibrated confidence, not
    folded into it. The forward run is not repeated: every re-run reads the main one's shift.
    ``noise``: the DEM-noise runs, possibly started already (see :class:`_NoiseRuns`).
    """
    main_verdict = core.decide(config, forward_shift=forward_shift)
    main = main_verdict.moves_toward
    theta = core.profiles.theta
    est = core.profiles.concavity.get("both")
    if core.profiles.theta_source == "collinearity" and est is not None and np.all(np.isfinite(est.ci95)):
        theta_lo, theta_hi = est.ci95
    else:
        theta_lo, theta_hi = theta - 0.1, theta + 0.1  # common practice: θ known to about ±0.1
    theta_lo, theta_hi = (float(np.clip(t, *_THETA_RANGE)) for t in (theta_lo, theta_hi))
    threshold = core.channels.threshold.value_m2
    noise = noise or _NoiseRuns(dem, side_a, side_b, config, lonlat=lonlat, weights_fn=weights_fn)
    runs: list[tuple[str, dict]] = []
    for i in range(noise.count):
        runs.append((f"DEM noise σ = {config.dem_error_m:g} m, correlation length {core.dem_error.length_m:g} m "
                     f"(#{i + 1})", {"noise": i}))
    if "z_chi" in decision_model().features:  # else θ (which changes χ only) cannot change the verdict
        runs += [(f"θ = {t:.2f}", {"theta": t}) for t in sorted({theta_lo, theta_hi} - {theta})]
    runs += [(f"channel area × ½ = {threshold / 2:.3g} m²", {"area": threshold / 2}),
             (f"channel area × 2 = {threshold * 2:.3g} m²", {"area": threshold * 2})]
    quick = _quick(config)
    results = []
    noisy = None
    for number, (label, change) in enumerate(runs, start=1):
        if step is not None:
            step(f"robustness re-run {number}/{len(runs)}: {label}")
        if "noise" in change:
            if noisy is None:
                noisy = noise.results(theta, threshold)
            run = noisy[change["noise"]]
            if isinstance(run, SideError):
                verdict = f"failed: {run}"
            else:
                verdict = _decide(*run, config, forward_shift=forward_shift).moves_toward
        else:
            try:  # the same DEM and flow paths: the same near-divide fields
                run = _core(dem, side_a, side_b, quick, lonlat=lonlat, theta=change.get("theta", theta),
                            channel_area_m2=change.get("area", threshold), weights_fn=weights_fn, n_boot_theta=0,
                            flow=core.flow, fields=core.fields, chi_only=True)
                verdict = run.decide(config, forward_shift=forward_shift).moves_toward
            except SideError as exc:  # e.g. a doubled threshold leaves a side without channels
                verdict = f"failed: {exc}"
        what = next(_CAN_CHANGE[k] for k in change)
        results.append({"change": label, "moves_toward": verdict, "kept": verdict == main, "can_change": what})
    share = sum(r["kept"] for r in results) / len(results) if results else 1.0
    return results, float(share)


def _side_samples(core: _Core, metric_values: np.ndarray, rng, n: int) -> np.ndarray:
    """Block-bootstrap samples of a side's mean of a near-divide metric (one value per divide sample)."""
    vals = metric_values[np.isfinite(metric_values)]
    if vals.size == 0:
        return np.full(n, np.nan)
    block = max(1, int(round(core.block_points * core.samples.size / max(core.points.size, 1))))
    return block_bootstrap_mean(vals, block=block, n_boot=n, rng=rng)


def _ksn_samples(profiles: ProfileAnalysis, side: str, rng, n: int) -> np.ndarray:
    """Bootstrap over streams of the side's median ksn."""
    code = 1 if side == "a" else 2
    streams = [s for s in profiles.streams if s.side == side]
    if not streams:
        return np.full(n, np.nan)
    values = [profiles.ksn[s.nodes][profiles.side[s.nodes] == code] for s in streams]
    values = [v[np.isfinite(v)] for v in values]
    values = [v for v in values if v.size]
    if not values:
        return np.full(n, np.nan)
    out = np.empty(n)
    for i in range(n):
        pick = rng.integers(0, len(values), len(values))
        out[i] = np.median(np.concatenate([values[j] for j in pick]))
    return out


def _near_divide_ksn(core: _Core, to_unit: float) -> dict:
    """Per divide sample and side: ksn (A0 = 1 m²), its standard error and the drainage area at the
    channel heads the sample's flow paths reach (the χ–z segment holding each head)."""
    ksn = core.profiles.grid(core.profiles.ksn).ravel() * to_unit
    se = core.profiles.grid(core.profiles.ksn_se).ravel() * to_unit
    area = core.flow.area.ravel()
    out = {}
    for side, heads in (("a", core.points.head_a), ("b", core.points.head_b)):
        per = {"ksn": [], "se": [], "area": []}
        for m in core.samples.members:
            h = heads[m]
            h = h[h >= 0]
            for key, grid in (("ksn", ksn), ("se", se), ("area", area)):
                v = grid[h] if h.size else np.array([np.nan])
                v = v[np.isfinite(v)]
                per[key].append(float(v.mean()) if v.size else np.nan)
        out[side] = {k: np.asarray(v) for k, v in per.items()}
    return out


def _uplift_next_to_divide(core: _Core, uplift: np.ndarray) -> tuple[float, float, float]:
    """The relative uplift raster's mean at the divide cells of each side, and over both networks."""
    u = np.asarray(uplift, dtype=np.float64).ravel()
    near = []
    for cells in (core.points.cell_a, core.points.cell_b):
        picked = np.concatenate([np.atleast_1d(cells[m]) for m in core.samples.members]) if core.samples.size \
            else np.zeros(0, dtype=np.int64)
        v = u[picked.astype(np.int64)] if picked.size else np.zeros(0)
        near.append(float(np.nanmean(v)) if np.isfinite(v).any() else np.nan)
    on_sides = core.channels.cells[core.profiles.side > 0]
    network = u[on_sides]
    return near[0], near[1], float(np.nanmean(network)) if np.isfinite(network).any() else np.nan


def _exponent_draws(core: _Core, config: AssessConfig, rng, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Draws of θ (within its collinearity interval when estimated) and n for the rates' intervals."""
    est = core.profiles.concavity.get("both")
    ci = est.ci95 if (est is not None and core.profiles.theta_source == "collinearity") else None
    return exponent_samples(core.profiles.theta, config.n, n, rng, theta_ci=ci)


def _divide_rate(core: _Core, config: AssessConfig, verdict: Verdict, cal: Calibration, ksn_a, ksn_b,
                 to_unit: float, rng, n: int, uplift: np.ndarray | None) -> dict:
    """The rate at the divide (mm/yr toward the victim) from the channel heads next to it (docs/methods.md §9)."""
    near = _near_divide_ksn(core, to_unit)
    theta_draws, n_draws = _exponent_draws(core, config, rng, n)
    erosion = {}
    for side, e_net, k_net in (("a", cal.erosion_a, ksn_a), ("b", cal.erosion_b, ksn_b)):
        values = near[side]["ksn"]
        if np.count_nonzero(np.isfinite(values) & (values > 0)) < MIN_SAMPLES:
            return {"withheld": f"too few channel heads next to the divide with a steepness on side {side} "
                                f"(at least {MIN_SAMPLES} needed)"}
        # the DEM error moves a head's ksn by about its standard error; being spatially correlated, by
        # the same amount at neighbouring heads: one shared draw per sample (conservative)
        se = float(np.nanmean(near[side]["se"])) if np.isfinite(near[side]["se"]).any() else 0.0
        head = _side_samples(core, values, rng, n) + rng.standard_normal(n) * se
        head = np.maximum(head, 1e-6 * float(np.nanmedian(values)))
        on_side = core.profiles.side == (1 if side == "a" else 2)
        area_ratio = float(np.nanmedian(near[side]["area"])) / float(np.median(core.flow.area.ravel()[
            core.channels.cells[on_side]]))
        erosion[side] = near_divide_erosion(e_net, k_net, head, n=config.n, n_draws=n_draws, area_ratio=area_ratio,
                                            theta_shift=theta_draws - core.profiles.theta)
    uplift_a = uplift_b = 0.0
    notes = []
    if uplift is not None:
        ua, ub, u_net = _uplift_next_to_divide(core, uplift)
        if np.isfinite(ua) and np.isfinite(ub) and np.isfinite(u_net) and u_net > 0:
            # the raster is relative: scale it so that the two networks' mean uplift equals their mean
            # erosion (each network lowering, on the whole, as fast as it is uplifted)
            scale = 0.5 * (cal.erosion_a + cal.erosion_b) / u_net
            uplift_a, uplift_b = ua * scale, ub * scale
            notes.append("uplift next to the divide from the relative uplift raster, scaled so that the networks' "
                         "mean uplift equals their mean erosion")
    grad_a, grad_b = core.samples.values["hillslope_gradient"]
    tan_a = _side_samples(core, grad_a, rng, n)
    tan_b = _side_samples(core, grad_b, rng, n)
    v = divide_rate(erosion["a"], erosion["b"], tan_a, tan_b, uplift_a=uplift_a, uplift_b=uplift_b) * 1e3
    median = float(np.nanmedian(v))
    says = "b" if median > 0 else "a"
    common = {"erosion_a_mm_yr": float(np.nanmedian(erosion["a"]) * 1e3),
              "erosion_b_mm_yr": float(np.nanmedian(erosion["b"]) * 1e3), "notes": notes}
    if verdict.moves_toward not in ("a", "b"):
        what = "finds the divide stable" if verdict.moves_toward == "stable" else "is undetermined"
        return {**common, "withheld": f"rate withheld: the verdict {what}, and a rate is given only with the "
                                      f"verdict's direction (the erosion rates alone would move it toward side {says})"}
    if says != verdict.moves_toward:
        return {**common, "withheld": f"rate withheld: the erosion rates next to the divide would move it toward "
                                      f"side {says}, against the verdict (toward side {verdict.moves_toward})"}
    toward = verdict.moves_toward
    v = v if toward == "b" else -v
    lo, best, hi = (float(x) for x in np.nanpercentile(v, [2.5, 50, 97.5]))
    flags = list(notes)
    if not (PLAUSIBLE_MM_PER_YR[0] <= abs(best) <= PLAUSIBLE_MM_PER_YR[1]):
        flags.append(f"implausible: measured divide migration rates span {PLAUSIBLE_MM_PER_YR[0]}–"
                     f"{PLAUSIBLE_MM_PER_YR[1]} mm/yr (He et al. 2024)")
    return {**common, "low": lo, "best": best, "high": hi, "toward": toward, "flags": flags}


def _rate_and_timing(core: _Core, config: AssessConfig, verdict: Verdict, uplift: np.ndarray | None = None):
    rng = np.random.default_rng(config.seed + 2)
    n = 500
    # χ and its slopes are measured with the reference area A0: χ ∝ A0^θ and dz/dχ ∝ A0^−θ. Rates
    # work with A0 = 1 m² (ksn, and K of E = K ksn^n), so convert once here: A0 then cancels
    # (Perron & Royden 2013) and appears nowhere else.
    to_unit = config.a0_m2 ** core.profiles.theta
    ksn_a = _ksn_samples(core.profiles, "a", rng, n) * to_unit
    ksn_b = _ksn_samples(core.profiles, "b", rng, n) * to_unit
    dated = None
    if config.knickpoint_age_years is not None and core.profiles.knickpoints:
        dated = max(core.profiles.knickpoints, key=lambda k: abs(k["t_slope"]) + abs(k["t_step"]))
        dated = {**dated, "chi": dated["chi"] / to_unit, "ksn_below": dated["ksn_below"] * to_unit,
                 "ksn_above": dated["ksn_above"] * to_unit}
    cal = calibrate(ksn_a=ksn_a, ksn_b=ksn_b, n=config.n, erosion_rate_a_mm_yr=config.erosion_rate_a_mm_yr,
                    erosion_rate_b_mm_yr=config.erosion_rate_b_mm_yr, erodibility=config.erodibility,
                    knickpoint=dated, knickpoint_age_years=config.knickpoint_age_years,
                    erosion_rate_a_error_mm_yr=config.erosion_rate_a_error_mm_yr,
                    erosion_rate_b_error_mm_yr=config.erosion_rate_b_error_mm_yr,
                    erodibility_error=config.erodibility_error,
                    knickpoint_age_error_years=config.knickpoint_age_error_years, seed=config.seed + 3)
    rate = None
    if cal.available:
        rate = _divide_rate(core, config, verdict, cal, ksn_a, ksn_b, to_unit, rng, n, uplift)
    knickpoints = []
    for kp in core.profiles.knickpoints:
        arrival = None
        # a knickpoint whose celerity is not defined (a spreading break, a vertical step) gets no time
        if cal.k is not None and kp["celerity_defined"]:
            # χ still to climb, up to the channel head at the top of its longest path: both from
            # the knickpoint's own network outlet (it may lie below the common base level)
            remaining = (core.profiles.chi_outlet[kp["head_position"]] - kp["chi"]) / to_unit
            speed = cal.k * float(step_celerity(kp["ksn_below"] * to_unit, kp["ksn_above"] * to_unit, config.n))
            years = remaining / speed
            lo, best, hi = (float(x) for x in np.nanpercentile(years, [2.5, 50, 97.5]))
            arrival = {"low": lo, "best": best, "high": hi}
        knickpoints.append({**kp, "arrival_years": arrival})
    return cal, rate, knickpoints


def _sig2(v: float) -> str:
    """A rate or a time with two significant figures (they are not known better), e.g. 12,000 or 0.034."""
    if not np.isfinite(v):
        return "n/a"
    rounded = float(f"{v:.2g}")
    return f"{rounded:,.0f}" if abs(rounded) >= 100 else f"{rounded:g}"


def _fmt(v: float, unit: str) -> str:
    if unit == "m/m":
        return f"{v:.3f}"
    if abs(v) >= 100:
        return f"{v:,.0f} {unit}"
    return f"{v:.3g} {unit}".strip()


def _given(config: AssessConfig | None, names: dict) -> str:
    """The calibration the user gave, quoted with its value and unit (empty when none)."""
    if config is None:
        return ""

    def pm(error: float | None, unit: str = "") -> str:
        return f" ± {_sig2(error)}{unit}" if error else ""

    rates = [f"the erosion rate given for {names[k]}, {v:g}{pm(e)} mm/yr"
             for k, v, e in (("a", config.erosion_rate_a_mm_yr, config.erosion_rate_a_error_mm_yr),
                             ("b", config.erosion_rate_b_mm_yr, config.erosion_rate_b_error_mm_yr)) if v is not None]
    if rates:
        return " and ".join(rates)
    if config.erodibility is not None:
        return (f"the erodibility given, K = {config.erodibility:g}{pm(config.erodibility_error)} "
                f"(SI units, n = {config.n:g})")
    if config.knickpoint_age_years is not None:
        return (f"the knickpoint age given, {config.knickpoint_age_years:,.0f}"
                f"{pm(config.knickpoint_age_error_years)} years")
    return ""


def _forward_lines(verdict: Verdict, names: dict) -> list[str]:
    """What the forward run said, and the near-divide measures alone, in words."""
    shift = verdict.forward_shift_cells
    if shift is None:
        return [f"No forward run: {verdict.notes[0].removeprefix('forward run not made: ')}."] if verdict.notes else []
    where = (f"{abs(shift):.2f} model cells toward {names['b' if shift > 0 else 'a']}"
             if abs(shift) >= FORWARD_NOISE_CELLS else f"less than {FORWARD_NOISE_CELLS:g} model cell (no direction)")
    out = [f"Forward run (the model run from this DEM for {FORWARD_HORIZON_TAU:g} response times, erodibility "
           f"unknown, uplift and hillslope diffusivity holding the present landscape in steady state): the divide "
           f"moved {where}."]
    near = verdict.near_divide_probabilities
    if near is None and verdict.basis == "forward run":
        out.append("The near-divide measures have too few independent samples: the forward run speaks alone.")
    elif near is None:
        out.append("The near-divide measures have too few independent samples, and the forward run alone does not "
                   "decide (--forward-in-decision lets it, at a cost in wrong directions; docs/validation.md).")
    else:
        out.append(f"Near-divide measures alone: toward {names['a']} {near['a']:.2f}, toward {names['b']} "
                   f"{near['b']:.2f}, stable {near['stable']:.2f}.")
    return out


def _text(verdict: Verdict, contrasts: list[Contrast], sides: Sides, rate: dict | None, knickpoints: list,
          equilibrium: EquilibriumDivide, cal: Calibration, *, same_channel: bool = False,
          config: AssessConfig | None = None, withheld: str | None = None, cautions: Sequence[str] = ()) -> str:
    names = {k: (f"{given} (side {k})" if given else f"side {k} ({side.spec.text})")
             for k, side, given in (("a", sides.a, getattr(config, "name_a", None)),
                                    ("b", sides.b, getattr(config, "name_b", None)))}
    by = {c.metric: c for c in contrasts}
    lines = []
    probs = verdict.probabilities
    odds = "" if probs is None else (
        f"Calibrated probabilities: toward {names['a']} {probs['a']:.2f}, toward {names['b']} {probs['b']:.2f}, "
        f"stable {probs['stable']:.2f}; an outcome needs {verdict.min_confidence:.2f}.")
    if verdict.moves_toward in ("a", "b"):
        victim, aggressor = verdict.moves_toward, verdict.aggressor
        lines.append(f"The divide is moving toward {names[victim]}: {names[aggressor]} is the aggressor, "
                     f"eroding headward into {names[victim]} (probability {verdict.confidence:.2f}).")
        lines.append(f"{len(verdict.agreeing)} of 4 near-divide measures point this way"
                     + (f" and {len(verdict.disagreeing)} the other way" if verdict.disagreeing else "") + "."
                     + (" Channel elevation and hillslope relief are read at the same channel cells here, "
                        "so together they are one piece of evidence."
                        if same_channel and {"channel_elevation", "hillslope_relief"} <= set(verdict.agreeing)
                        else ""))
    elif verdict.moves_toward == "stable":
        lines.append(f"The divide appears stable: the near-divide measures are balanced across it "
                     f"(probability {verdict.confidence:.2f}).")
    elif verdict.reason == "lines disagree":
        lines.append("Undetermined: the near-divide measures and the forward run point opposite ways (see below); "
                     "the two lines of evidence disagree, so no direction is given.")
    elif verdict.reason == "insufficient data":
        lines.append("Undetermined: insufficient data. " + INSUFFICIENT_HELP)
    elif verdict.reason == "chi only":
        lines.append("Undetermined: only χ, the long-run tendency, would carry a direction here, and χ alone never "
                     "makes one (divides at steady state under a contrast in uplift, rock or climate are lopsided "
                     "in χ; Whipple et al. 2017).")
    else:
        lines.append(f"Undetermined: no outcome reaches the required probability ({verdict.min_confidence:.2f}); "
                     "the evidence is too weak or points both ways.")
    if odds:
        lines.append(odds)
    lines += _forward_lines(verdict, names)
    if verdict.moves_toward in ("a", "b", "stable"):
        read_forward = bool(getattr(config, "forward_in_decision", False)) and verdict.forward_shift_cells is not None
        right = right_share(verdict.confidence, forward=read_forward)
        if right is not None:
            lines.append(f"In model landscapes like this one, verdicts at this confidence were right "
                         f"{right[0]:.0%} of the time ({right[1]} held-out benchmark landscapes; docs/validation.md). "
                         "Real landscapes may differ from the model ones.")
    for c in contrasts:
        if not c.sufficient or not np.isfinite(c.ci95[0]):
            why = ("no divide sample has it on both sides (χ: a side's networks may not reach the common base "
                   "level; see sides.*.networks in summary.json)" if c.n_samples == 0 else
                   f"{c.n_points} independent sample(s); at least {MIN_SAMPLES} per side needed")
            lines.append(f"- {c.metric.replace('_', ' ')}: insufficient data ({why}).")
            continue
        sense = {
            "interval spans zero": "no significant difference",
            "too small": "a difference too small to count",
            "not consistent along the divide": "a difference that does not hold along the divide "
                                               f"(mean {c.consistency:.1f} × its spread; {SPREAD_RATIO:g} needed)",
        }.get(c.why_none, "no usable difference") if c.moves_toward == "none" else f"points toward {names[c.moves_toward]}"
        lines.append(f"- {c.metric.replace('_', ' ')}: a {_fmt(c.a, c.unit)}, b {_fmt(c.b, c.unit)}, "
                     f"difference {_fmt(c.difference, c.unit)} (95 % interval {_fmt(c.ci95[0], c.unit)} to "
                     f"{_fmt(c.ci95[1], c.unit)}); {sense} (rule: divide moves toward {c.rule}).")
    chi = by.get("chi")
    if chi is not None and verdict.moves_toward in ("a", "b") and verdict.long_run not in ("none", verdict.moves_toward):
        lines.append(f"χ alone points the other way (toward {names[verdict.long_run]}): the present motion may "
                     "reverse in the long run, or uplift, erodibility or climate differ across the divide.")
    if verdict.robustness_share is not None:
        lines.append(f"Robustness: {verdict.robustness_share:.0%} of re-runs with perturbed inputs (DEM error, "
                     "channel threshold, and θ when χ could decide) kept this verdict.")
    if rate is not None:
        how = (f", by the forward run from this DEM, corrected for its bias on model landscapes (about "
               f"{_sig2(float(np.exp(FORWARD_RATE_LOG_BIAS)))} times too slow there)."
               if rate.get("method") == "forward run" else
               ", by crest kinematics at the divide (erosion next to it over the flank gradients).")
        lines.append(f"Migration rate toward {names[rate['toward']]}: {_sig2(rate['best'])} mm/yr "
                     f"(95 % interval {_sig2(rate['low'])} to {_sig2(rate['high'])}) from "
                     f"{_given(config, names) or cal.source}{how}")
        lines += [f"Note: {f}." for f in rate["flags"]]
    elif withheld:
        lines.append(f"No migration rate: {withheld.removeprefix('rate withheld: ')}.")
    else:
        lines.append("No rate: give a measured erosion rate of either side (--erosion-rate-a/-b, mm/yr), an "
                     "erodibility K, or the age of a knickpoint to turn steepness into rates and years.")
    timed = [k for k in knickpoints if k["arrival_years"] is not None]
    undefined = [k for k in knickpoints if not k.get("celerity_defined", True)]
    if knickpoints:
        lines.append(f"{len(knickpoints)} significant knickpoint(s) are migrating up the channels"
                     + (f"; the nearest arrival at a channel head is in about "
                        f"{_sig2(min(k['arrival_years']['best'] for k in timed))} years" if timed else "")
                     + ". When they reach the divide the contrasts above will change.")
    if undefined:
        lines.append(f"{len(undefined)} of them have no defined celerity (a break that spreads out, or a vertical "
                     "step), so no arrival time is given for them.")
    eq = equilibrium.summary()
    if eq["median_distance_m"] is not None:
        lines.append(f"Equilibrium divide (first-order): about {eq['median_distance_m']:,.0f} m "
                     f"from the present divide, toward {names.get(eq['toward'], eq['toward'])}.")
    lines += [*cautions, CAUTION]
    return "\n".join(lines)


def _forward_evidence(dem: Dem, core: _Core, config: AssessConfig, progress) -> tuple[ForwardShift | None, str]:
    """The forward run (its shift of the divide in cells, into b) and a note when it was not made."""
    if not config.forward_run:
        return None, "forward run not made (switched off)"
    if progress is not None:
        progress("forward run of the model from the DEM (0.3 response times)")
    try:
        run = forward_shift(dem, core.sides, theta=float(core.profiles.theta), n=float(config.n),
                            closed_edges=tuple(config.closed_edges),
                            channel_area_m2=float(core.channels.threshold.value_m2))
    except (SideError, ParameterError) as exc:  # e.g. the sides do not touch on the model grid
        return None, f"forward run not made: {exc}"
    if not np.isfinite(run.shift_cells):
        return None, "forward run not made: the divide left the model grid"
    return run, ""


#: Forward runs from DEMs perturbed by the DEM error model, made only when the forward run's rate is given:
#: their spread of the divide's rate (shift over time scale) is carried into its interval. Each costs a
#: forward run (seconds), so two: with the unperturbed run, three realisations of the rate.
_FORWARD_ERROR_RUNS = 2


def _forward_error_factors(dem: Dem, core: _Core, config: AssessConfig, run: ForwardShift,
                           progress=None) -> np.ndarray | None:
    """The DEM error carried into the forward run's rate: each perturbed run's shift per unit-K year over the run's own.

    The perturbations are drawn from the assessment's spatially correlated DEM error model (the one of the
    robustness re-runs); a perturbed run that fails or leaves the grid is left out. None without a DEM error.
    """
    if config.dem_error_m <= 0 or _FORWARD_ERROR_RUNS < 1:
        return None
    own = run.shift_cells / run.years_unit_k
    rng = np.random.default_rng(config.seed + 6)
    # the perturbations drawn in sequence (reproducible), the runs side by side on threads: the model's
    # kernels release the GIL, so the two runs take the time of one when a second core is free
    noisy = [_perturbed(dem, core.dem_error, rng) for _ in range(_FORWARD_ERROR_RUNS)]

    def one(grid: Dem) -> float:
        try:
            other = forward_shift(grid, core.sides, theta=run.theta, n=run.n, closed_edges=tuple(config.closed_edges),
                                  channel_area_m2=float(core.channels.threshold.value_m2))
        except (SideError, ParameterError):
            return np.nan
        return (other.shift_cells / other.years_unit_k) / own

    if progress is not None:
        progress(f"{_FORWARD_ERROR_RUNS} forward runs from perturbed DEMs (DEM uncertainty in the rate interval)")
    with ThreadPoolExecutor(max_workers=_FORWARD_ERROR_RUNS, thread_name_prefix="divides-forward-error") as pool:
        ratios = list(pool.map(one, noisy))
    return np.asarray([1.0, *(r for r in ratios if np.isfinite(r))])


#: Draws of θ and n for the forward run's rate: each re-evaluates A^m S^n over the model grid (up to 300 x 300
#: cells), so fewer than the 500 of the rate at the divide; the bias spread dominates the interval.
_FORWARD_EXPONENT_DRAWS = 200


def _forward_rate(run: ForwardShift | None, cal: Calibration, verdict: Verdict, seed: int,
                  exponents: tuple[np.ndarray, np.ndarray] | None = None, dem_error=None) -> dict | None:
    """The forward run's rate of the divide (mm/yr toward the victim) under the calibrated K, corrected for the
    run's bias measured on the benchmark (:data:`divides.assess.rate.FORWARD_RATE_LOG_BIAS`), in the verdict's
    direction only (docs/methods.md §9); None without a forward run or a calibration.

    ``exponents``: draws of θ and n (:func:`divides.assess.rate.exponent_samples`), paired in turn with the K
    samples and carried through K and the run's time scale at each draw; None or a run without its ground: not
    carried. ``dem_error``: a callable giving the DEM error's factors on the rate
    (:func:`_forward_error_factors`), called only once the rate is to be given; None: not carried.
    """
    # K at the run's own exponents (cheap) decides whether there is a rate at all; the drawn exponents,
    # each re-evaluated over the model grid, only once the rate is to be given
    if run is None or not np.isfinite(run.years_unit_k) or forward_erodibility(cal, run) is None:
        return None
    if verdict.moves_toward not in ("a", "b"):
        return {"withheld": "the verdict has no direction"}
    if abs(run.shift_cells) < FORWARD_NOISE_CELLS:
        return {"withheld": f"the forward run moves the divide less than {FORWARD_NOISE_CELLS:g} model cell"}
    says = "b" if run.shift_cells > 0 else "a"
    if says != verdict.moves_toward:
        return {"withheld": f"the forward run moves the divide toward side {says}, against the verdict"}
    theta, n = exponents if exponents is not None and run.carries_exponents else (None, None)
    k = forward_erodibility(cal, run, theta, n)
    if k is None:
        return None
    k = np.asarray(k, dtype=np.float64).ravel()
    unit = np.abs(run.rate_m_per_yr(k) if theta is None else run.rate_m_per_yr(k, theta, n))
    rng = np.random.default_rng(seed)
    z = rng.standard_normal(max(k.size, 4000))
    v = np.resize(unit, z.size) * 1e3 * np.exp(FORWARD_RATE_LOG_BIAS + FORWARD_RATE_LOG_SPREAD * z)
    factors = None if dem_error is None else dem_error()
    with_error = factors is not None and factors.size > 1
    if with_error:
        # each draw takes one run's rate, the unperturbed run's among them (a perturbed run moving the divide
        # the other way counts as no motion: it widens the interval toward zero rather than being dropped)
        v = v * np.clip(rng.choice(factors, size=v.size), 0.0, None)
    lo, best, hi = (float(x) for x in np.nanpercentile(v, [2.5, 50, 97.5]))
    carried = ["K", *(("θ", "n") if theta is not None else ()),
               *((f"the DEM error ({factors.size - 1} perturbed runs)",) if with_error else ())]
    left = [w for w, on in (("θ and n", theta is not None), ("the DEM error", with_error)) if not on]
    return {"low": lo, "best": best, "high": hi, "toward": says,
            "note": f"forward run under the calibrated K, corrected for its bias on model landscapes; "
                    f"{', '.join(carried)} and that bias's spread carried"
                    + "".join(f"; {w} not carried" for w in left)}


def _primary_rate(at_divide: dict | None, forward: dict | None, *, uplift_given: bool = False
                  ) -> tuple[dict | None, str | None]:
    """The rate reported as the divide's (and why none is): the forward run's when it gives one (it matched the
    measured motion better on the benchmark's training part), else the rate at the divide. With an uplift
    raster the rate at the divide comes first: it reads the raster, the forward run assumes uniform uplift."""
    def usable(rate: dict | None) -> bool:  # a rate whose samples were all undefined is no rate
        return rate is not None and rate.get("best") is not None and bool(np.isfinite(rate["best"]))

    divide_ok = usable(at_divide)
    if usable(forward) and not (uplift_given and divide_ok):
        flags = []
        if not (PLAUSIBLE_MM_PER_YR[0] <= forward["best"] <= PLAUSIBLE_MM_PER_YR[1]):
            flags.append(f"implausible: measured divide migration rates span {PLAUSIBLE_MM_PER_YR[0]}–"
                         f"{PLAUSIBLE_MM_PER_YR[1]} mm/yr (He et al. 2024)")
        erosion = {k: at_divide[k] for k in ("erosion_a_mm_yr", "erosion_b_mm_yr")} if divide_ok else {}
        return {**erosion, **{k: forward[k] for k in ("low", "best", "high", "toward")},
                "method": "forward run", "flags": flags}, None
    if divide_ok:
        return {**at_divide, "method": "crest kinematics at the divide"}, None
    return None, (at_divide or {}).get("withheld")


def _filled_share(voids: VoidFill, divide: Divide) -> float:
    """Share of the divide's vertices on cells filled by interpolation (:meth:`VoidFill.share_along`)."""
    if not divide.lines:
        return 0.0
    return voids.share_along(np.concatenate([line.row for line in divide.lines]),
                             np.concatenate([line.col for line in divide.lines]))


def assess(
    dem: Dem,
    side_a: str,
    side_b: str,
    *,
    lonlat: bool = False,
    runoff: np.ndarray | None = None,
    erodibility_raster: np.ndarray | None = None,
    uplift_raster: np.ndarray | None = None,
    progress=None,
    **options,
) -> Assessment:
    """Assess whether the divide between two sides of a DEM is stable or moving.

    Parameters
    ----------
    dem : Dem
    side_a, side_b : str
        Side SPECs: an edge (``north``, ``south``, ``east``, ``west``) or points ``x,y;x,y``.
    lonlat : bool
        SPEC points are longitude,latitude.
    runoff, erodibility_raster, uplift_raster : ndarray, optional
        Rasters on the DEM grid weighting χ (see :func:`divides.profiles.chi_weights`).
    progress : callable, optional
        Called with a short description as each stage starts.
    **options
        Any field of :class:`divides.config.AssessConfig` (``theta``, ``channel_area_m2``,
        ``reference_area_m2``, ``base_level_m``, ``dem_error_m``, ``erosion_rate_a_mm_yr`` …).

    Returns
    -------
    Assessment
        ``result.summary`` is the ``summary.json`` document; ``result.verdict`` the verdict.
    """
    config = AssessConfig.from_options(**options)
    dem, voids = fill_voids(dem, config.voids)  # before routing: its label grid then adds nothing to the peak

    def weights_fn(flow: FlowGraph) -> ChiWeights | None:
        if runoff is None and erodibility_raster is None and uplift_raster is None:
            return None
        return chi_weights(flow, runoff=runoff, erodibility=erodibility_raster, uplift=uplift_raster, n=config.n)

    noise = _NoiseRuns(dem, side_a, side_b, config, lonlat=lonlat, weights_fn=weights_fn)
    # beside the main pass only when routing in memory (the tiled path is chosen to save memory)
    beside = noise.count > 0 and active_plan() is None
    early = None
    if beside and not isinstance(config.theta, str):  # a numeric θ is the one the main pass uses
        def early(channels: Channels) -> None:
            noise.start(float(config.theta), channels.threshold.value_m2)
    try:
        core = _core(dem, side_a, side_b, config, lonlat=lonlat, theta=config.theta,
                     channel_area_m2=config.channel_area_m2, weights_fn=weights_fn, n_boot_theta=100, step=progress,
                     on_channels=early)
        if beside:  # θ estimated by the main pass: the runs start now, beside the forward run
            noise.start(core.profiles.theta, core.channels.threshold.value_m2)
        forward, forward_note = _forward_evidence(dem, core, config, progress)
        forward_shift = None if forward is None else forward.shift_cells
        runs, share = ([], None)
        if config.robustness:
            runs, share = _robustness(dem, side_a, side_b, config, core, lonlat=lonlat, weights_fn=weights_fn,
                                      forward_shift=forward_shift, step=progress, noise=noise)
    finally:
        noise.close()
    if progress is not None:
        progress("verdict, rates, knickpoint arrival and the equilibrium divide")
    verdict = dataclasses.replace(core.decide(config, share, forward_shift),
                                  notes=[forward_note] if forward_note else [])
    cal, rate, knickpoints = _rate_and_timing(core, config, verdict, uplift=uplift_raster)
    exponents = _exponent_draws(core, config, np.random.default_rng(config.seed + 5), _FORWARD_EXPONENT_DRAWS) \
        if cal.available else None
    forward_rate = _forward_rate(forward, cal, verdict, config.seed + 4, exponents,
                                 dem_error=None if forward is None else
                                 (lambda: _forward_error_factors(dem, core, config, forward, progress)))
    at_divide = rate
    rate, withheld = _primary_rate(rate, forward_rate, uplift_given=uplift_raster is not None)
    if rate is None and withheld is None and cal.notes and not cal.available:  # a calibration that could not be used
        withheld = cal.notes[0]
    equilibrium = equilibrium_divide(dem, core.points, theta=core.profiles.theta,
                                     reference_area_m2=core.reference_area_m2, a0_m2=config.a0_m2)
    holes = raster_holes_cells(dem, runoff=runoff, erodibility=erodibility_raster, uplift=uplift_raster)
    cautions = [note for note in (raster_holes_note({"raster_holes_cells": holes}, dem.n_valid),
                                  interior_nodata_note(voids, dem.n_valid),
                                  filled_divide_note(_filled_share(voids, core.divide))) if note]
    verdict = dataclasses.replace(verdict, text=_text(verdict, core.contrasts, core.sides, rate, knickpoints,
                                                      equilibrium, cal, same_channel=core.same_channel,
                                                      config=config, withheld=withheld, cautions=cautions))
    automatic = {
        "theta_used": core.profiles.theta,
        "theta_source": core.profiles.theta_source,
        "channel_area_used_m2": core.channels.threshold.value_m2,
        "channel_area_source": core.channels.threshold.source,
        "channel_area_reason": core.channels.threshold.reason,
        "reference_area_used_m2": core.reference_area_m2,
        "base_level_used_m": core.base.elevation_m,
        "base_level_source": core.base.source,
        "divide_spacing_used_m": core.spacing_m,
        "block_points": core.block_points,
        "lonlat": lonlat,
        "weights": core.profiles.weights,
    }
    if holes:  # cells where a raster has no value read its reference (profiles.chi.chi_weights)
        automatic["raster_holes_cells"] = holes
    return Assessment(config=config, dem=dem, flow=core.flow, channels=core.channels, sides=core.sides,
                      base=core.base, divide=core.divide, profiles=core.profiles, points=core.points,
                      contrasts=core.contrasts, verdict=verdict, calibration=cal, rate=rate,
                      knickpoints=knickpoints, equilibrium=equilibrium, robustness=runs, automatic=automatic,
                      rate_withheld=withheld, forward_rate=forward_rate, rate_at_divide=at_divide,
                      forward_run=forward, voids=voids)
