"""``divides assess``: is the divide between two sides of a DEM stable or moving?

Every option is checked before the DEM is read, and the output folder before
any work is done, so that a mistake costs seconds and leaves nothing behind.
numpy, rasterio and numba are imported inside the functions, not here, so
that ``divides --help`` does not pay for them.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer

from divides.cli import options as opt
from divides.errors import DemReadError, GridError, ParameterError

if TYPE_CHECKING:  # pragma: no cover - imports for type hints only
    from divides.assess.assessment import Assessment
    from divides.io.dem import Dem

__all__ = ["assess", "AssessRequest", "assess_request", "check_raster_paths", "run_assessment", "print_result", "RASTER_OPTIONS"]

#: Rasters on the DEM grid that weight χ: option name -> keyword of :func:`divides.assess`.
RASTER_OPTIONS = {"--runoff-raster": "runoff", "--erodibility-raster": "erodibility_raster",
                  "--uplift-raster": "uplift_raster"}

#: Older names of the raster options (hidden aliases) -> the current names.
RASTER_ALIASES = {"--runoff": "--runoff-raster", "--erodibility": "--erodibility-raster", "--uplift": "--uplift-raster"}

#: Seconds the progress lines are held back at the start of the work (see :meth:`Progress.hold`).
HOLD_SECONDS = 2.0

#: Erosion rates above this (mm/yr) are refused: the fastest measured basin-wide rates are
#: about 10 mm/yr, so 1000 mm/yr is a unit mistake (the library's limit too).
MAX_EROSION_MM_YR = 1000.0

# ---------------------------------------------------------------- options of assess only
ThetaOption = Annotated[
    str,
    typer.Option("--theta", metavar="VALUE|auto", help="Concavity m/n for χ and ksn; 'auto' estimates it from the "
                 "DEM (collinearity of tributaries, slope-area as a check; 0.45 where the data do not bound it)."),
]
ChannelAreaOption = Annotated[
    str | None,
    typer.Option("--channel-area", metavar="M2", show_default=False,
                 help="Drainage area (m²) where channels begin; default: read from the DEM's slope-area data."),
]
ReferenceAreaOption = Annotated[
    str | None,
    typer.Option("--reference-area", metavar="M2", show_default=False,
                 help="Drainage area (m²) at which near-divide channel metrics are read; default: the channel area."),
]
BaseLevelOption = Annotated[
    str | None,
    typer.Option("--base-level", metavar="M", show_default=False,
                 help="Common base level (m) for χ; default: the highest outlet of the channel networks reaching "
                 "the divide. Networks whose outlet stands above it are left out of χ."),
]
DemErrorOption = Annotated[
    str | None,
    typer.Option("--dem-error", metavar="M", show_default=False,
                 help="Vertical standard error of the DEM (m, default 1): noise of the robustness re-runs and of "
                 "the rate's interval, and the smallest knickpoint step; in a screening also read by the "
                 "probability of motion and, from 3 m, by the ranking."),
]
DemErrorLengthOption = Annotated[
    str | None,
    typer.Option("--dem-error-length", metavar="M", show_default=False,
                 help="Correlation length of the DEM error (m, default 3 cells): how far apart two cells' "
                 "errors become nearly independent."),
]
ErosionRateAOption = Annotated[
    str | None,
    typer.Option("--erosion-rate-a", metavar="MM/YR", show_default=False,
                 help="Measured erosion rate of side a (mm/yr, e.g. basin-averaged cosmogenic), with its error as "
                 "0.2±0.05 or 0.2+-0.05 if known; turns steepness into rates and years."),
]
ErosionRateBOption = Annotated[
    str | None,
    typer.Option("--erosion-rate-b", metavar="MM/YR", show_default=False,
                 help="Measured erosion rate of side b (mm/yr, optionally ±error); with --erosion-rate-a both "
                 "are used."),
]
ErodibilityKOption = Annotated[
    str | None,
    typer.Option("--erodibility-k", metavar="K", show_default=False,
                 help="Erodibility K of E = K ksn^n (SI: m^(1-2θ)/yr for n = 1; optionally ±error), instead of "
                 "erosion rates."),
]
KnickpointAgeOption = Annotated[
    str | None,
    typer.Option("--knickpoint-age", metavar="YEARS", show_default=False,
                 help="Age (years, optionally ±error) of the most prominent knickpoint, to calibrate K from how far "
                 "it has travelled."),
]


def _error_option(name: str, unit: str) -> Any:
    return Annotated[str | None, typer.Option(f"{name}-error", metavar=unit, show_default=False,
                                              help=f"One standard deviation of {name} ({unit}); or write it as "
                                              "VALUE±ERROR.")]


ErosionRateAErrorOption = _error_option("--erosion-rate-a", "MM/YR")
ErosionRateBErrorOption = _error_option("--erosion-rate-b", "MM/YR")
ErodibilityKErrorOption = _error_option("--erodibility-k", "K")
KnickpointAgeErrorOption = _error_option("--knickpoint-age", "YEARS")
SlopeExponentOption = Annotated[
    str | None,
    typer.Option("--n", metavar="N", show_default=False,
                 help="Slope exponent n of the stream-power law (0.5 to 4; default 1)."),
]
RunoffOption = Annotated[
    str | None,
    typer.Option("--runoff-raster", metavar="RASTER", show_default=False,
                 help="Relative runoff or precipitation on the DEM grid (same shape and transform): weights χ."),
]
ErodibilityRasterOption = Annotated[
    str | None,
    typer.Option("--erodibility-raster", metavar="RASTER", show_default=False,
                 help="Relative rock erodibility on the DEM grid (positive values): weights χ. "
                 "(A single value K is --erodibility-k.)"),
]
UpliftRasterOption = Annotated[
    str | None,
    typer.Option("--uplift-raster", metavar="RASTER", show_default=False,
                 help="Relative rock uplift rate on the DEM grid (positive values): weights χ."),
]
# The older names of the raster options, still accepted but not shown.
RunoffAlias = Annotated[str | None, typer.Option("--runoff", hidden=True, show_default=False)]
ErodibilityAlias = Annotated[str | None, typer.Option("--erodibility", hidden=True, show_default=False)]
UpliftAlias = Annotated[str | None, typer.Option("--uplift", hidden=True, show_default=False)]
SnapRadiusOption = Annotated[
    str | None,
    typer.Option("--snap-radius", metavar="M", show_default=False,
                 help="Radius (m) within which SPEC points snap to the largest channel; default five cells."),
]
NoRobustnessOption = Annotated[
    bool,
    typer.Option("--no-robustness", help="Skip the re-runs with a perturbed DEM, θ and channel area (faster)."),
]
NoForwardRunOption = Annotated[
    bool,
    typer.Option("--no-forward-run", help="Decide from the near-divide measures alone, without the short forward "
                                          "run of the model from the DEM (a few seconds faster)."),
]
ForwardInDecisionOption = Annotated[
    bool,
    typer.Option("--forward-in-decision", help="Let the calibrated decision read the forward run (it may then give "
                                               "a direction where near-divide samples are too few; more right and "
                                               "more wrong directions on the benchmark, docs/validation.md)."),
]
MinConfidenceOption = Annotated[
    str | None,
    typer.Option("--min-confidence", metavar="P", show_default=False,
                 help="Calibrated probability a direction or 'stable' needs (above 1/3, at most 1; default 0.8); "
                      "below it the verdict is 'undetermined'."),
]


@dataclass(frozen=True)
class AssessRequest:
    """An assessment as asked for on the command line, every value checked.

    Attributes
    ----------
    side_a, side_b : str
        The side SPECs as typed.
    lonlat : bool
    options : dict
        Keyword options of :func:`divides.assess` (fields of
        :class:`divides.config.AssessConfig`).
    rasters : dict
        Keyword of :func:`divides.assess` (``runoff``, ``erodibility_raster``,
        ``uplift_raster``) -> (option name, path).
    """

    side_a: str
    side_b: str
    lonlat: bool = False
    options: dict = field(default_factory=dict)
    rasters: dict = field(default_factory=dict)


def _positive(text: str | None, option: str, unit: str, typical: str = "") -> float | None:
    return opt.parse_bounded(text, option=option, unit=unit, low=0.0, high=float("inf"), typical=typical)


def assess_request(
    *,
    side_a: str,
    side_b: str,
    lonlat: bool = False,
    theta: str = "0.45",
    channel_area: str | None = None,
    reference_area: str | None = None,
    base_level: str | None = None,
    dem_error: str | None = None,
    dem_error_length: str | None = None,
    erosion_rate_a: str | None = None,
    erosion_rate_b: str | None = None,
    erodibility_k: str | None = None,
    knickpoint_age: str | None = None,
    errors: dict[str, str | None] | None = None,
    n: str | None = None,
    runoff: str | None = None,
    erodibility: str | None = None,
    uplift: str | None = None,
    snap_radius: str | None = None,
    robustness: bool = True,
    forward_run: bool = True,
    forward_in_decision: bool = False,
    seed: int = 0,
    route: opt.RouteOptions | None = None,
    name_a: str | None = None,
    name_b: str | None = None,
    raster_aliases: dict[str, str | None] | None = None,
    min_confidence: str | None = None,
) -> AssessRequest:
    """Check the options of ``divides assess`` as typed, before anything is read.

    Raises
    ------
    ParameterError, SideError, DemReadError
        The first problem found, naming the option, the value and what is accepted.
    """
    from divides.assess.sides import parse_side  # numpy: fine once a command runs

    from divides.cli.dem_checks import check_finite_points

    spec_a, spec_b = (parse_side(s, lonlat=lonlat) for s in (side_a, side_b))
    for option, spec, text in (("--side-a", spec_a, side_a), ("--side-b", spec_b, side_b)):
        check_finite_points(spec.points, option=option, text=text)
    names = {"name_a": opt.parse_name(name_a, option="--name-a"), "name_b": opt.parse_name(name_b, option="--name-b")}
    if names["name_a"] is not None and names["name_a"].lower() == (names["name_b"] or "").lower():
        raise ParameterError(f"--name-a and --name-b are the same ({name_a!r}); give the two sides different names")
    if forward_in_decision and not forward_run:
        raise ParameterError("--forward-in-decision needs the forward run; drop --no-forward-run or "
                             "--forward-in-decision")
    if spec_a.text.lower() == spec_b.text.lower():
        raise ParameterError(f"--side-a and --side-b are the same ({side_a!r}); give the two different sides of the divide")
    errors = errors or {}
    split = {name: opt.split_error(text, errors.get(name), option=name, unit=unit) for name, text, unit in (
        ("--erosion-rate-a", erosion_rate_a, "mm/yr"), ("--erosion-rate-b", erosion_rate_b, "mm/yr"),
        ("--erodibility-k", erodibility_k, "m^(1-2θ)/yr"), ("--knickpoint-age", knickpoint_age, "years"))}
    (erosion_rate_a, _), (erosion_rate_b, _), (erodibility_k, _), (knickpoint_age, _) = split.values()
    rates = {
        "--erosion-rate-a": opt.parse_bounded(erosion_rate_a, option="--erosion-rate-a", unit="mm/yr", low=0,
                                              high=MAX_EROSION_MM_YR, typical="measured rates: 0.001 to 10 mm/yr"),
        "--erosion-rate-b": opt.parse_bounded(erosion_rate_b, option="--erosion-rate-b", unit="mm/yr", low=0,
                                              high=MAX_EROSION_MM_YR, typical="measured rates: 0.001 to 10 mm/yr"),
    }
    k = _positive(erodibility_k, "--erodibility-k", "m^(1-2θ)/yr", "often 1e-7 to 1e-4 for θ = 0.45")
    age = _positive(knickpoint_age, "--knickpoint-age", "years")
    given = [name for name, value in (("--erosion-rate-a/-b", rates["--erosion-rate-a"] or rates["--erosion-rate-b"]),
                                      ("--erodibility-k", k), ("--knickpoint-age", age)) if value is not None]
    if len(given) > 1:
        raise ParameterError(f"{' and '.join(given)} are two calibrations of erosion; give only one of "
                             "--erosion-rate-a/-b (mm/yr), --erodibility-k or --knickpoint-age")
    options: dict[str, Any] = {
        "theta": opt.parse_theta(theta),
        "channel_area_m2": _positive(channel_area, "--channel-area", "m²", "often 1e4 to 1e6 m²"),
        "reference_area_m2": _positive(reference_area, "--reference-area", "m²"),
        "base_level_m": None if base_level is None
        else opt.parse_number(base_level, option="--base-level", accepted="an elevation in metres"),
        "erosion_rate_a_mm_yr": rates["--erosion-rate-a"],
        "erosion_rate_b_mm_yr": rates["--erosion-rate-b"],
        "erodibility": k,
        "knickpoint_age_years": age,
        "erosion_rate_a_error_mm_yr": split["--erosion-rate-a"][1],
        "erosion_rate_b_error_mm_yr": split["--erosion-rate-b"][1],
        "erodibility_error": split["--erodibility-k"][1],
        "knickpoint_age_error_years": split["--knickpoint-age"][1],
        "snap_radius_m": _positive(snap_radius, "--snap-radius", "m"),
        "robustness": robustness,
        "forward_run": forward_run,
        "forward_in_decision": forward_in_decision,
        "seed": seed,
        **names,
    }
    if dem_error is not None:
        options["dem_error_m"] = opt.parse_bounded(dem_error, option="--dem-error", unit="m", low=0, high=100,
                                                   low_inclusive=True, typical="lidar 0.1, SRTM about 5 to 10")
    if dem_error_length is not None:
        options["dem_error_length_m"] = opt.parse_bounded(dem_error_length, option="--dem-error-length", unit="m",
                                                          low=0, high=1e5, low_inclusive=True,
                                                          typical="one to a few cells")
    if min_confidence is not None:
        options["min_confidence"] = opt.parse_bounded(min_confidence, option="--min-confidence", unit="(probability)",
                                                      low=1 / 3, high=1, typical="0.8 (default)")
    if n is not None:
        options["n"] = opt.parse_bounded(n, option="--n", unit="(slope exponent)", low=0.5, high=4,
                                         low_inclusive=True, typical="1 unless known otherwise")
    route = route or opt.RouteOptions()
    for option, spec in (("--side-a", spec_a), ("--side-b", spec_b)):
        if spec.edge is not None and spec.edge in route.closed_edges:
            raise ParameterError(f"{option} {spec.edge!r} is also in --closed-edges: nothing drains off a closed edge; "
                                 "give an open edge or points for that side, or leave that edge open")
    options.update(conditioning=route.conditioning, sea_level_m=route.sea_level, closed_edges=route.closed_edges,
                   voids=route.voids)
    options = {key: value for key, value in options.items() if value is not None}
    rasters = check_raster_paths(runoff=runoff, erodibility=erodibility, uplift=uplift, aliases=raster_aliases)
    return AssessRequest(side_a=side_a, side_b=side_b, lonlat=lonlat, options=options, rasters=rasters)


def check_raster_paths(*, runoff: str | None, erodibility: str | None, uplift: str | None,
                       aliases: dict[str, str | None] | None = None) -> dict:
    """Check the χ-weighting raster paths; return keyword of :func:`divides.assess` -> (option, path).

    ``aliases`` maps the older option names (``--runoff``, ``--erodibility``,
    ``--uplift``) to what was given under them.
    """
    aliases = aliases or {}
    given = {"--runoff-raster": runoff, "--erodibility-raster": erodibility, "--uplift-raster": uplift}
    for old, value in aliases.items():
        new = RASTER_ALIASES[old]
        given[new] = opt.pick_alias(given[new], value, option=new, old_option=old)
    rasters = {}
    for option, path in given.items():
        if path is not None:
            try:
                rasters[RASTER_OPTIONS[option]] = (option, opt.check_dem_path(path))
            except DemReadError as exc:  # check_dem_path speaks of "the DEM": re-aim it at this option
                raise DemReadError(f"{option}: {str(exc).replace('DEM', 'raster')}") from None
    return rasters


def _read_raster_on_grid(option: str, path: str, dem: Dem, read: opt.DemOptions) -> Any:
    """Read a weighting raster and check it lies on the DEM's grid; NaN where it has no value."""
    import numpy as np

    import divides
    from divides.errors import DividesError

    try:
        raster = divides.read_dem(path, bounds=read.bounds, band=1, cell_size=read.cell_size)
    except DividesError as exc:
        raise type(exc)(f"{option}: {exc}") from None
    same_crs = raster.crs is None or dem.crs is None or raster.crs == dem.crs
    if raster.shape != dem.shape or not raster.transform.almost_equals(dem.transform) or not same_crs:
        what = (f"{raster.shape[0]} x {raster.shape[1]} cells" if raster.shape != dem.shape
                else "a different CRS" if not same_crs else f"the transform {tuple(raster.transform)[:6]}")
        raise GridError(
            f"{option} raster '{path}' has {what}; it must be on the DEM grid ({dem.shape[0]} x {dem.shape[1]} cells, "
            f"transform {tuple(dem.transform)[:6]}): resample it onto the DEM first"
        )
    values = np.where(raster.valid, raster.elevation, np.nan).astype(np.float64)
    good = np.isfinite(values) & dem.valid
    if not good.any():
        raise ParameterError(f"{option} raster '{path}' has no value on the DEM's valid cells")
    if np.any(values[good] <= 0):
        raise ParameterError(f"{option} raster '{path}' holds {float(values[good].min()):g}; "
                             "its values must be positive (relative values: 1 = typical)")
    holes = int(np.count_nonzero(dem.valid)) - int(np.count_nonzero(good))
    if holes:  # read as the raster's reference value (docs/methods.md §3): say so, it is not the user's number
        import warnings

        from divides.errors import DividesWarning

        warnings.warn(f"{option} raster '{path}' has no value on {holes} of the DEM's cells "
                      f"({100 * holes / dem.n_valid:.2g} %); they are read as its typical (reference) value",
                      DividesWarning, stacklevel=2)
    return values


def run_assessment(
    read: opt.DemOptions,
    request: AssessRequest,
    *,
    out: Path,
    overwrite: bool,
    progress: opt.Progress,
    by_tiles: opt.TiledOptions | None = None,
) -> tuple[Assessment, Path]:
    """Read the DEM and the rasters, assess the divide and write every output.

    Parameters
    ----------
    read : DemOptions
        The DEM and how to read it.
    request : AssessRequest
    out : pathlib.Path
        Output folder (checked with :func:`divides.cli.options.check_out_dir`).
    overwrite : bool
    progress : Progress
        Three stages: reading, assessing, writing.
    by_tiles : TiledOptions, optional
        ``--tiled``/``--scratch``: routing by tiles when asked for or when in-memory routing would not fit.

    Returns
    -------
    (Assessment, pathlib.Path)
        The result and the folder written.
    """
    import divides
    from divides.assess.sides import parse_side
    from divides.cli.dem_checks import (check_closed_edges, check_enough_cells, check_options_against_dem,
                                        check_side_points)
    from divides.report.writer import STAGES, write_assessment

    # Read and check in silence: a mistake the DEM reveals is one error line, with no progress before it.
    from divides.terrain.tiled_flow import tiled_routing

    by_tiles = by_tiles or opt.TiledOptions(conditioning=request.options.get("conditioning", "fill"))
    dem, plan = by_tiles.read(read, "assess", "assess a smaller window around the divide with --bounds")
    check_enough_cells(dem)
    check_options_against_dem(dem, sea_level=request.options.get("sea_level_m"),
                              channel_area=request.options.get("channel_area_m2"),
                              reference_area=request.options.get("reference_area_m2"))
    check_closed_edges(dem, request.options.get("closed_edges", ()))
    for option, text in (("--side-a", request.side_a), ("--side-b", request.side_b)):
        spec = parse_side(text, lonlat=request.lonlat)
        check_side_points(dem, spec.points, option=option, text=text, lonlat=request.lonlat)
    rasters = {keyword: _read_raster_on_grid(option, path, dem, read)
               for keyword, (option, path) in request.rasters.items()}
    # Sides that overlap or have no channels show only once flow is routed: hold the progress lines
    # back for a moment, so that on a small DEM such a mistake is still the only line printed.
    def step(text: str) -> None:
        if not text.startswith(("routing", "channels")):  # the sides are resolved: past the user's mistakes
            progress.release()
        progress.step(text)

    with progress.held(HOLD_SECONDS):
        progress.stage(f"read the DEM {Path(read.path).name} ({dem.shape[0]} x {dem.shape[1]} cells)")
        robust = "" if request.options.get("robustness", True) else ", no robustness re-runs"
        progress.stage(f"assessing the divide between {request.side_a} and {request.side_b} "
                       f"({dem.shape[0]} x {dem.shape[1]} cells: routing, channels, χ, contrasts{robust})")
        progress.announce_cold_kernels()
        with tiled_routing(plan):
            result = divides.assess(dem, request.side_a, request.side_b, lonlat=request.lonlat, **rasters,
                                    progress=step, **request.options)
    progress.finish()

    progress.stage(f"writing the outputs to {out}")
    steps = iter(range(1, len(STAGES) + 1))
    written = write_assessment(result, out, overwrite=overwrite, command=opt.current_command(), cli=True,
                               progress=lambda stage: progress.step(stage, next(steps, len(STAGES)), len(STAGES)))
    progress.finish()
    return result, Path(written)


def print_result(result: Assessment, out: Path, *, json_output: bool) -> None:
    """Print the verdict (or the summary.json document) on stdout, and where the report is."""
    if json_output:  # the document written, provenance included
        summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
        typer.echo(json.dumps(summary, indent=2, allow_nan=False))
        return
    typer.echo(result.verdict.text)
    typer.echo("")
    typer.echo(f"Report:  {out / 'report.html'}")
    typer.echo(f"Outputs: {out} (summary.json, verdict.txt, figures/, layers/, rasters/, tables/)")


def assess(
    dem: opt.DemArgument,
    side_a: opt.SideAOption,
    side_b: opt.SideBOption,
    theta: ThetaOption = "0.45",
    channel_area: ChannelAreaOption = None,
    reference_area: ReferenceAreaOption = None,
    base_level: BaseLevelOption = None,
    dem_error: DemErrorOption = None,
    dem_error_length: DemErrorLengthOption = None,
    erosion_rate_a: ErosionRateAOption = None,
    erosion_rate_b: ErosionRateBOption = None,
    erodibility_k: ErodibilityKOption = None,
    knickpoint_age: KnickpointAgeOption = None,
    erosion_rate_a_error: ErosionRateAErrorOption = None,
    erosion_rate_b_error: ErosionRateBErrorOption = None,
    erodibility_k_error: ErodibilityKErrorOption = None,
    knickpoint_age_error: KnickpointAgeErrorOption = None,
    n: SlopeExponentOption = None,
    name_a: opt.NameAOption = None,
    name_b: opt.NameBOption = None,
    runoff: RunoffOption = None,
    erodibility: ErodibilityRasterOption = None,
    uplift: UpliftRasterOption = None,
    lonlat: opt.LonLatOption = False,
    snap_radius: SnapRadiusOption = None,
    closed_edges: opt.ClosedEdgesOption = None,
    no_robustness: NoRobustnessOption = False,
    no_forward_run: NoForwardRunOption = False,
    forward_in_decision: ForwardInDecisionOption = False,
    min_confidence: MinConfidenceOption = None,
    seed: opt.SeedOption = 0,
    out: opt.OutOption = None,
    overwrite: opt.OverwriteOption = False,
    json_output: opt.JsonOption = False,
    quiet: opt.QuietOption = False,
    band: opt.BandOption = None,
    bounds: opt.BoundsOption = None,
    vertical_unit: opt.VerticalUnitOption = "m",
    cell_size: opt.CellSizeOption = None,
    sea_level: opt.SeaLevelOption = None,
    conditioning: opt.ConditioningOption = "fill",
    voids: opt.VoidsOption = "fill",
    tiled: opt.TiledOption = False,
    scratch: opt.ScratchOption = None,
    workers: opt.TileWorkersOption = None,
    scheduler: opt.TileSchedulerOption = None,
    runoff_alias: RunoffAlias = None,
    erodibility_alias: ErodibilityAlias = None,
    uplift_alias: UpliftAlias = None,
) -> None:
    """Assess whether the divide between two sides of a DEM is stable or moving.

    Compares χ, channel elevation, hillslope gradient and relief across the
    divide with confidence intervals, names the aggressor and the victim,
    and writes summary.json, verdict.txt, report.html, figures, GIS layers,
    rasters and tables to --out. Prints the verdict (or, with --json, the
    summary.json document) and where the report is. Progress goes to stderr.

    A screening tool: verify its verdicts in the field; local codes and
    licensed professionals decide.
    \f
    Exit codes: 0 done; 2 a bad input or option (one line on stderr, nothing
    written); 1 an internal error (one line and the path of a log).
    """
    read = opt.dem_options(dem, band=band, bounds=bounds, vertical_unit=vertical_unit, cell_size=cell_size)
    route = opt.route_options(conditioning=conditioning, sea_level=sea_level, closed_edges=closed_edges,
                              voids=voids)
    by_tiles = opt.tiled_options(tiled, scratch, conditioning=route.conditioning, workers=workers,
                                 scheduler=scheduler)
    request = assess_request(
        side_a=side_a, side_b=side_b, lonlat=lonlat, theta=theta, channel_area=channel_area,
        reference_area=reference_area, base_level=base_level, dem_error=dem_error, erosion_rate_a=erosion_rate_a,
        dem_error_length=dem_error_length,
        erosion_rate_b=erosion_rate_b, erodibility_k=erodibility_k, knickpoint_age=knickpoint_age, n=n,
        errors={"--erosion-rate-a": erosion_rate_a_error, "--erosion-rate-b": erosion_rate_b_error,
                "--erodibility-k": erodibility_k_error, "--knickpoint-age": knickpoint_age_error},
        runoff=runoff, erodibility=erodibility, uplift=uplift, snap_radius=snap_radius,
        robustness=not no_robustness, forward_run=not no_forward_run,
        forward_in_decision=forward_in_decision, seed=seed, route=route, name_a=name_a,
        name_b=name_b,
        min_confidence=min_confidence,
        raster_aliases={"--runoff": runoff_alias, "--erodibility": erodibility_alias, "--uplift": uplift_alias},
    )
    folder = opt.check_out_dir(out if out is not None else opt.default_out_dir(read.path, "assess"),
                               overwrite=overwrite)
    progress = opt.Progress(3, quiet=quiet)
    with opt.quiet_warnings(quiet):
        result, written = run_assessment(read, request, out=folder, overwrite=overwrite, progress=progress,
                                         by_tiles=by_tiles)
    print_result(result, written, json_output=json_output)
