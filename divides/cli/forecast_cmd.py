"""``divides forecast``: run the forward model from the present DEM and say where the divide goes.

numpy, rasterio, numba and matplotlib are imported inside the functions, so
that ``divides --help`` does not pay for them. Every output is built in
memory first and written into a temporary folder that replaces ``--out``
only when complete: a failed run leaves nothing behind.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer

from divides.cli import options as opt
from divides.cli.assess_cmd import HOLD_SECONDS, ChannelAreaOption, SnapRadiusOption, assess_request
from divides.errors import ParameterError

if TYPE_CHECKING:  # pragma: no cover - for type hints only
    from divides.outlook import Forecast

__all__ = ["forecast", "geojson_divides", "forecast_figure", "forecast_png", "write_outputs",
           "OUTPUT_FILES"]

#: Files written into ``--out`` (the layer only when the DEM has a CRS). ``summary.json`` holds the
#: headline and marks the folder as a `divides` output, which ``--overwrite`` may replace.
OUTPUT_FILES = ("forecast.json", "summary.json", "layers/forecast_divide.geojson", "figures/forecast.png",
                "figures/forecast.svg")

_DECIMALS = 7  # 1e-7 degree is about 1 cm on the ground

_RATE_HELP = "Measured erosion rate of side {} (mm/yr), to calibrate K."
_K_HELP = "Erodibility K of E = K ksn^n (SI units), if known."
_THETA_HELP = "Concavity m/n (default 0.45; 'auto' estimates it)."
_D_HELP = ("Hillslope diffusivity (m²/yr; default: fitted with the uplift so that the present DEM is the "
           "model's steady state).")


def _option(name: str, metavar: str, text: str, *, show_default: bool = False, **kwargs: Any) -> Any:
    """A typer option with its metavar and help."""
    return typer.Option(name, metavar=metavar, help=text, show_default=show_default, **kwargs)


def _optional_number(text: str | None, option: str, accepted: str, *, positive: bool = True) -> float | None:
    return None if text is None else opt.parse_number(text, option=option, accepted=accepted, positive=positive)


UpliftPatternOption = Annotated[
    str,
    typer.Option("--uplift-pattern", metavar="uniform|sides", show_default=True,
                 help="Uplift that balances the present landscape: one rate everywhere, or one per side."),
]
UpliftPatternAlias = Annotated[str | None, typer.Option("--uplift", hidden=True, show_default=False)]


def forecast(
    dem: opt.DemArgument,
    side_a: opt.SideAOption,
    side_b: opt.SideBOption,
    years: Annotated[str, _option("--years", "T", "How many years ahead to forecast.")],
    erosion_rate_a: Annotated[str | None, _option("--erosion-rate-a", "MM/YR", _RATE_HELP.format("a"))] = None,
    erosion_rate_b: Annotated[str | None, _option("--erosion-rate-b", "MM/YR", _RATE_HELP.format("b"))] = None,
    erodibility_k: Annotated[str | None, _option("--erodibility-k", "K", _K_HELP)] = None,
    theta: Annotated[str | None, _option("--theta", "VALUE|auto", _THETA_HELP)] = None,
    n: Annotated[str | None, _option("--n", "N", "Slope exponent n of the stream-power law (default 1).")] = None,
    channel_area: ChannelAreaOption = None,
    snap_radius: SnapRadiusOption = None,
    name_a: opt.NameAOption = None,
    name_b: opt.NameBOption = None,
    closed_edges: opt.ClosedEdgesOption = None,
    uplift_pattern: UpliftPatternOption = "uniform",
    diffusivity: Annotated[str | None, _option("--diffusivity", "M2/YR", _D_HELP)] = None,
    runs: Annotated[int, _option("--runs", "N", "Model runs: a central one plus an ensemble over K, θ, n and D.", min=1,
                                 show_default=True)] = 9,
    seed: opt.SeedOption = 0,
    lonlat: opt.LonLatOption = False,
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
    uplift_alias: UpliftPatternAlias = None,
) -> None:
    """Forecast where the divide between two sides will be in T years.

    Runs stream-power landscape evolution forward from the present DEM, with
    θ, n and erodibility K from the assessment of the divide (K calibrated
    from a measured erosion rate, or given), and reports the divide's
    displacement with low/best/high bands from the uncertainty of K, θ, n and D.
    Large DEMs are block-averaged to at most 300 x 300 cells first. One of
    --erosion-rate-a, --erosion-rate-b or --erodibility-k is required.
    Writes forecast.json, summary.json, a GeoJSON layer and a figure to --out.
    A screening estimate: modelled timescales depend on the solver, time
    step and grid, and on the calibration.
    """
    read = opt.dem_options(dem, band=band, bounds=bounds, vertical_unit=vertical_unit, cell_size=cell_size)
    route = opt.route_options(conditioning=conditioning, sea_level=sea_level, closed_edges=closed_edges,
                              voids=voids)
    years_f = opt.parse_number(years, option="--years", accepted="a positive number of years", positive=True)
    rate_a = _optional_number(erosion_rate_a, "--erosion-rate-a", "an erosion rate in mm/yr (> 0)")
    rate_b = _optional_number(erosion_rate_b, "--erosion-rate-b", "an erosion rate in mm/yr (> 0)")
    k = _optional_number(erodibility_k, "--erodibility-k", "a positive erodibility K (SI units)")
    if rate_a is None and rate_b is None and k is None:
        raise ParameterError("a forecast needs a calibration of erosion: give --erosion-rate-a or --erosion-rate-b "
                             "(a measured erosion rate in mm/yr) or --erodibility-k")
    diffusivity_f = _optional_number(diffusivity, "--diffusivity", "a diffusivity in m²/yr (>= 0)", positive=False)
    if diffusivity_f is not None and diffusivity_f < 0:
        raise ParameterError(f"--diffusivity {diffusivity!r} is not accepted; give a diffusivity in m²/yr (>= 0)")
    # --uplift is the older name of --uplift-pattern (in assess and screen --uplift-raster is a raster)
    given = opt.pick_alias(None if uplift_pattern == "uniform" else uplift_pattern, uplift_alias,
                           option="--uplift-pattern", old_option="--uplift")
    pattern = opt.parse_choice(given or "uniform", option="--uplift" if uplift_alias is not None else "--uplift-pattern",
                               choices=("uniform", "sides"))
    request = assess_request(side_a=side_a, side_b=side_b, lonlat=lonlat, channel_area=channel_area,
                             snap_radius=snap_radius, seed=seed, route=route, name_a=name_a, name_b=name_b)
    options: dict[str, Any] = {
        "erosion_rate_a_mm_yr": rate_a, "erosion_rate_b_mm_yr": rate_b, "erodibility": k,
        **{key: request.options[key] for key in ("closed_edges", "conditioning", "voids", "sea_level_m",
                                                  "channel_area_m2", "snap_radius_m", "name_a", "name_b")
           if key in request.options},
    }
    theta_v = None if theta is None else opt.parse_theta(theta)
    if theta_v is not None:
        options["theta"] = theta_v
    # the same range and message as assess, which the forecast's assessment runs under
    n_v = opt.parse_bounded(n, option="--n", unit="(slope exponent)", low=0.5, high=4, low_inclusive=True,
                            typical="1 unless known otherwise")
    if n_v is not None:
        options["n"] = n_v
    # fail before the long part: the folder first
    target = opt.check_out_dir(out if out is not None else opt.default_out_dir(read.path, "forecast"),
                               overwrite=overwrite)

    import divides
    from divides.cli.dem_checks import (check_closed_edges, check_enough_cells, check_options_against_dem,
                                        check_side_points)
    from divides.terrain.sides import parse_side
    from divides.outlook import forecast as run_forecast
    from divides.report.provenance import provenance, public_summary
    from divides.io.memory import MemoryNeed

    progress = opt.Progress(3, quiet=quiet)
    with opt.quiet_warnings(quiet):
        need = MemoryNeed.of("forecast", "forecast on a smaller window around the divide with --bounds")
        surface = divides.read_dem(read.path, **read.read_kwargs(), memory=need)
        check_enough_cells(surface)
        check_options_against_dem(surface, sea_level=route.sea_level, channel_area=options.get("channel_area_m2"))
        check_closed_edges(surface, route.closed_edges)
        for option, text in (("--side-a", side_a), ("--side-b", side_b)):
            check_side_points(surface, parse_side(text, lonlat=lonlat).points, option=option, text=text,
                              lonlat=lonlat)
        # A mistake found early in the work (sides that overlap) stays the only line printed.
        with progress.held(HOLD_SECONDS):
            progress.stage(f"read the DEM {Path(read.path).name} ({surface.shape[0]} x {surface.shape[1]} cells)")
            progress.stage(f"forecasting {years_f:,.0f} years ({runs} model run(s))")
            progress.announce_cold_kernels()
            result = run_forecast(surface, side_a, side_b, years=years_f, n_runs=runs, seed=seed, uplift=pattern,
                                  diffusivity=diffusivity_f,
                                  lonlat=lonlat, **options)
        progress.stage(f"writing the outputs to {target}")
        prov = provenance(surface.path, command=opt.current_command())
        document = public_summary(result.to_dict(), prov)
        layer = geojson_divides(result)
        document["outputs"] = [name for name in OUTPUT_FILES if layer is not None or not name.startswith("layers/")]
        if layer is None:
            document["notes"].append("No GeoJSON layer: the DEM has no CRS, so it cannot be placed on the globe.")
        files: dict[str, bytes] = {
            "forecast.json": _json_bytes(document),
            "summary.json": _json_bytes(_headline(document)),
        }
        if layer is not None:
            files["layers/forecast_divide.geojson"] = _json_bytes(layer, indent=None)
        from divides.report.figures import to_png, to_svg

        fig = forecast_figure(result, names=(options.get("name_a"), options.get("name_b")))
        files["figures/forecast.png"] = to_png(fig)
        files["figures/forecast.svg"] = to_svg(fig)
        written = write_outputs(target, files, overwrite=overwrite, cli=True)
    # Everything is computed and written before anything is printed.
    typer.echo(json.dumps(document, indent=2, allow_nan=False) if json_output
               else result.text() + f"\nOutputs written to {written}")


def _headline(document: dict) -> dict:
    """The short ``summary.json`` of a forecast folder; the full document is ``forecast.json``."""
    keys = ("schema", "provenance", "sides", "years", "moves_toward", "bands_agree", "ensemble",
            "agrees_with_assessment", "comparison", "displacement_m", "rate_mm_per_yr", "timescale_caution",
            "caution")
    return {**{k: document[k] for k in keys}, "document": "forecast.json"}


def _json_bytes(obj: Any, *, indent: int | None = 2) -> bytes:
    return (json.dumps(obj, indent=indent, ensure_ascii=False, allow_nan=False) + "\n").encode("utf-8")


# ------------------------------------------------------------------ layers
def _lonlat(dem: Any, x: Any, y: Any) -> tuple[Any, Any]:
    import numpy as np

    lon, lat = dem.to_lonlat(np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64))
    lon = (np.asarray(lon) + 180.0) % 360.0 - 180.0  # RFC 7946 §4: longitudes within ±180
    return np.round(lon, _DECIMALS), np.round(np.asarray(lat), _DECIMALS)


def _layer_runs(result: Forecast) -> list[tuple[str, Any]]:
    """(kind, run) of every divide drawn: present, the bands, then each ensemble member."""
    low, high = result.low_run, result.high_run
    return [("best", result.central), ("low", low), ("high", high), *(("run", r) for r in result.members)]


def geojson_divides(result: Forecast) -> dict | None:
    """RFC 7946 FeatureCollection of the divide lines: present, best, low, high and each run.

    Positions are longitude, latitude (WGS 84). None when the DEM has no CRS.
    Properties: ``kind`` (present, best, low, high, run), ``run``, ``line``,
    ``years`` (0 for the present), ``theta``, ``displacement_m`` (into side b),
    ``length_m``.
    """
    dem = result.dem
    if dem.crs is None:
        return None
    features = []

    def add(kind: str, label: str | None, lines: list, years: float, theta: float | None, disp: float | None) -> None:
        for i, line in enumerate(lines):
            if line.x.size < 2:
                continue
            lon, lat = _lonlat(dem, line.x, line.y)
            features.append({
                "type": "Feature",
                "geometry": {"type": "LineString", "coordinates": [[float(a), float(b)] for a, b in zip(lon, lat)]},
                "properties": {"kind": kind, "run": label, "line": i, "years": years, "theta": theta,
                               "displacement_m": disp, "length_m": float(line.length_m)},
            })

    add("present", None, result.present, 0.0, None, 0.0)
    for kind, run in _layer_runs(result):
        d = float(run.displacement_m[-1])
        add(kind, run.label, run.lines, result.years, run.theta, d if d == d else None)
    return {"type": "FeatureCollection", "features": features}


# ------------------------------------------------------------------ figure
def forecast_figure(result: Forecast, *, names: tuple[str | None, str | None] = (None, None)) -> Any:
    """A map of the present and forecast divides beside the displacement through time (a matplotlib Figure).

    The map has the scale bar, north arrow and CRS label of every map of the
    report room; elevation is drawn in cividis and the divides in Okabe–Ito
    colours with distinct dashes, so the figure reads in greyscale too.
    """
    import numpy as np

    from divides.report import figures as report_figures

    dem = result.dem
    frame = report_figures._frame(dem)
    scale = frame.scale
    fig = report_figures._figure(11.0, 4.8)
    ax_map, ax_t = fig.subplots(1, 2, width_ratios=[1.3, 1.0])
    left, bottom, right, top = dem.bounds
    z = np.where(dem.valid, dem.elevation, np.nan)
    image = ax_map.imshow(z, extent=[left * scale, right * scale, bottom * scale, top * scale], cmap="cividis",
                          interpolation="nearest")
    fig.colorbar(image, ax=ax_map, shrink=0.8, label="Elevation at the start (m)")
    styles = {"present": dict(color="black", lw=2.2, ls="-"), "best": dict(color="#D55E00", lw=2.0, ls="-"),
              "low": dict(color="white", lw=1.4, ls="--"), "high": dict(color="#E69F00", lw=1.4, ls=":")}
    drawn = [("present", result.present)] + [(kind, run.lines) for kind, run in _layer_runs(result)[:3]]
    for kind, lines in drawn:
        for i, line in enumerate(lines):
            label = None if i else {"present": "present divide", "best": f"in {result.years:,.0f} yr (central)",
                                    "low": "band: low", "high": "band: high"}[kind]
            ax_map.plot(np.asarray(line.x) * scale, np.asarray(line.y) * scale, label=label, **styles[kind])
    ax_map.set_ylabel(frame.ylabel)
    labels = [f"{name} ({spec})" if name else spec for name, spec in zip(names, (result.side_a, result.side_b))]
    ax_map.set_title(f"Side a: {labels[0]}   side b: {labels[1]}", fontsize=10)
    ax_map.set_aspect(frame.aspect)
    ax_map.set_xlim(left * scale, right * scale)
    ax_map.set_ylim(bottom * scale, top * scale)
    report_figures.map_furniture(fig, ax_map, dem, frame)
    ax_map.legend(loc="upper left", fontsize=8, framealpha=0.85)  # the scale bar has the lower left

    band = result.band
    t = result.times / 1e3
    ax_t.fill_between(t, band["low"], band["high"], color="0.8", label="ensemble range")
    ax_t.plot(t, band["best"], color="#D55E00", lw=2.0, label="central run")
    ax_t.axhline(0.0, color="black", lw=0.8)
    ax_t.set_xlabel("Years from now (thousands)")
    ax_t.set_ylabel("Divide displacement (m, + into side b)")
    ax_t.legend(loc="best", fontsize=8)
    ax_t.set_title("Screening estimate: timescales depend on solver, step, grid\n"
                   "(Forte & Barnhart 2024) and on the calibration", fontsize=9)
    return fig


def forecast_png(result: Forecast) -> bytes:
    """:func:`forecast_figure` as PNG bytes (200 dpi)."""
    from divides.report.figures import to_png

    return to_png(forecast_figure(result))


# ------------------------------------------------------------------ writing
def write_outputs(out: str | os.PathLike, files: dict[str, bytes], *, overwrite: bool = False,
                  cli: bool = False) -> Path:
    """Write ``files`` (relative path -> bytes) into the folder ``out``, all or nothing.

    The folder is built under a temporary name beside ``out`` and moved into
    place when complete (:func:`divides.report.writer.staged_output`).

    Parameters
    ----------
    out : str or os.PathLike
        The folder to create (its parent is created if missing).
    files : dict
        Relative paths and their contents.
    overwrite : bool
        Replace an existing empty folder or earlier `divides` output, once the new one is complete.
    cli : bool
        Errors name ``--out``/``--overwrite`` rather than Python arguments.

    Returns
    -------
    pathlib.Path
        The folder.

    Raises
    ------
    OutputError
        ``out`` exists (without ``overwrite``), is not a folder or an earlier
        output, or cannot be written; nothing is left behind.
    """
    from divides.io.writing import atomic_write
    from divides.report.writer import staged_output

    with staged_output(out, overwrite=overwrite, cli=cli) as tmp:
        for name, data in files.items():
            with atomic_write(tmp / name, parents=True) as part:
                part.write_bytes(data)
    return Path(os.path.abspath(os.fspath(out)))
