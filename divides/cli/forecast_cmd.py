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
from divides.errors import ParameterError

if TYPE_CHECKING:  # pragma: no cover - for type hints only
    from divides.model.forecast import Forecast

__all__ = ["forecast", "geojson_divides", "forecast_png", "write_outputs",
           "OUTPUT_FILES"]

#: Files written into ``--out`` (the layer only when the DEM has a CRS). ``summary.json`` holds the
#: headline and marks the folder as a `divides` output, which ``--overwrite`` may replace.
OUTPUT_FILES = ("forecast.json", "summary.json", "layers/forecast_divide.geojson", "figures/forecast.png")

_DECIMALS = 7  # 1e-7 degree is about 1 cm on the ground

_SIDE_HELP = "Side a: an edge (north, south, east, west) or points 'x,y;x,y'."
_RATE_HELP = "Measured erosion rate of side {} (mm/yr), to calibrate K."
_K_HELP = "Erodibility K of E = K ksn^n (SI units), if known."
_THETA_HELP = "Concavity m/n (default 0.45; 'auto' estimates it)."
_EDGES_HELP = "DEM edges nothing drains across (e.g. north,south)."
_D_HELP = "Hillslope diffusivity (m²/yr; default 0.001)."
_OUT_HELP = "Write forecast.json, summary.json, layers/ and figures/ into this new folder."
_UPLIFT_HELP = "Uplift that balances the present landscape: one rate, or one per side."


def _option(name: str, metavar: str, text: str, *, show_default: bool = False, **kwargs: Any) -> Any:
    """A typer option with its metavar and help."""
    return typer.Option(name, metavar=metavar, help=text, show_default=show_default, **kwargs)


def _optional_number(text: str | None, option: str, accepted: str, *, positive: bool = True) -> float | None:
    return None if text is None else opt.parse_number(text, option=option, accepted=accepted, positive=positive)


def forecast(
    dem: opt.DemArgument,
    side_a: Annotated[str, _option("--side-a", "SPEC", _SIDE_HELP)],
    side_b: Annotated[str, _option("--side-b", "SPEC", "Side b, as side a.")],
    years: Annotated[str, _option("--years", "T", "How many years ahead to forecast.")],
    erosion_rate_a: Annotated[str | None, _option("--erosion-rate-a", "MM_PER_YR", _RATE_HELP.format("a"))] = None,
    erosion_rate_b: Annotated[str | None, _option("--erosion-rate-b", "MM_PER_YR", _RATE_HELP.format("b"))] = None,
    erodibility_k: Annotated[str | None, _option("--erodibility-k", "K", _K_HELP)] = None,
    theta: Annotated[str | None, _option("--theta", "VALUE|auto", _THETA_HELP)] = None,
    n: Annotated[str | None, _option("--n", "N", "Slope exponent n of the stream-power law (default 1).")] = None,
    closed_edges: Annotated[str | None, _option("--closed-edges", "EDGE,EDGE", _EDGES_HELP)] = None,
    uplift: Annotated[str, _option("--uplift", "uniform|sides", _UPLIFT_HELP, show_default=True)] = "uniform",
    diffusivity: Annotated[str | None, _option("--diffusivity", "M2_PER_YR", _D_HELP)] = None,
    runs: Annotated[int, _option("--runs", "N", "Model runs: a central one plus an ensemble over K and θ.", min=1,
                                 show_default=True)] = 9,
    seed: Annotated[int, _option("--seed", "N", "Seed of the ensemble and the assessment.", show_default=True)] = 0,
    lonlat: Annotated[bool, typer.Option("--lonlat", help="SPEC points are longitude,latitude (WGS 84).")] = False,
    out: Annotated[str | None, _option("--out", "DIR", _OUT_HELP)] = None,
    overwrite: Annotated[bool, typer.Option("--overwrite", help="Replace an earlier output folder.")] = False,
    json_output: opt.JsonOption = False,
    quiet: opt.QuietOption = False,
    band: opt.BandOption = None,
    vertical_unit: opt.VerticalUnitOption = "m",
    cell_size: opt.CellSizeOption = None,
) -> None:
    """Forecast where the divide between two sides will be in T years.

    Runs stream-power landscape evolution forward from the present DEM, with
    θ, n and erodibility K from the assessment of the divide (K calibrated
    from a measured erosion rate, or given), and reports the divide's
    displacement with low/best/high bands from the uncertainty of K and θ.
    Large DEMs are block-averaged to at most 300 x 300 cells first. One of
    --erosion-rate-a, --erosion-rate-b or --erodibility-k is required.
    A screening estimate: modelled timescales depend on the solver, time
    step and grid, and on the calibration.
    """
    read = opt.dem_options(dem, band=band, vertical_unit=vertical_unit, cell_size=cell_size)
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
    uplift = opt.parse_choice(uplift, option="--uplift", choices=("uniform", "sides"))
    options: dict[str, Any] = {
        "erosion_rate_a_mm_yr": rate_a, "erosion_rate_b_mm_yr": rate_b, "erodibility": k,
        "closed_edges": opt.parse_closed_edges(closed_edges),
    }
    theta_v = None if theta is None else opt.parse_theta(theta)
    if theta_v is not None:
        options["theta"] = theta_v
    n_v = _optional_number(n, "--n", "a slope exponent between 0.5 and 4")
    if n_v is not None:
        options["n"] = n_v
    target = None
    if out is not None:
        from divides.report.writer import check_out_dir

        target = check_out_dir(out, overwrite=overwrite)  # fail before the long part

    import divides
    from divides.model.forecast import DEFAULT_DIFFUSIVITY
    from divides.io.memory import MemoryNeed
    from divides.model.forecast import forecast as run_forecast

    with opt.quiet_warnings(quiet):
        need = MemoryNeed.of("forecast", "forecast on a smaller window around the divide with --bounds")
        surface = divides.read_dem(read.path, **read.read_kwargs(), memory=need)
        result = run_forecast(surface, side_a, side_b, years=years_f, n_runs=runs, seed=seed, uplift=uplift,
                              diffusivity=DEFAULT_DIFFUSIVITY if diffusivity_f is None else diffusivity_f,
                              lonlat=lonlat, **options)
        document = result.to_dict()
        files: dict[str, bytes] = {}
        if target is not None:
            layer = geojson_divides(result)
            document["outputs"] = [name for name in OUTPUT_FILES if layer is not None or not name.startswith("layers/")]
            if layer is None:
                document["notes"].append("No GeoJSON layer: the DEM has no CRS, so it cannot be placed on the globe.")
            files["forecast.json"] = _json_bytes(document)
            files["summary.json"] = _json_bytes(_headline(document))
            if layer is not None:
                files["layers/forecast_divide.geojson"] = _json_bytes(layer, indent=None)
            files["figures/forecast.png"] = forecast_png(result)
            write_outputs(target, files, overwrite=overwrite)
    # Everything is computed and written before anything is printed.
    typer.echo(json.dumps(document, indent=2, allow_nan=False) if json_output else result.text()
               + ("" if target is None else f"\nOutputs written to {target}"))


def _headline(document: dict) -> dict:
    """The short ``summary.json`` of a forecast folder; the full document is ``forecast.json``."""
    keys = ("schema", "sides", "years", "moves_toward", "bands_agree", "displacement_m", "rate_mm_per_yr",
            "timescale_caution", "caution")
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
def forecast_png(result: Forecast) -> bytes:
    """A map of the present and forecast divides beside the displacement through time, as PNG bytes."""
    import io

    import numpy as np
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    dem = result.dem
    geographic = dem.crs is not None and dem.geographic
    if geographic:
        scale, unit = 1.0, "°"
    else:  # projected metres, feet…, or a local metric grid: kilometres on the axes
        scale, unit = 1e-3 * (float(dem.crs.linear_units_factor[1] or 1.0) if dem.crs else 1.0), "km"
    fig = Figure(figsize=(11.0, 4.8), dpi=120, layout="constrained")
    FigureCanvasAgg(fig)
    ax_map, ax_t = fig.subplots(1, 2, width_ratios=[1.3, 1.0])
    left, bottom, right, top = dem.bounds
    z = np.where(dem.valid, dem.elevation, np.nan)
    image = ax_map.imshow(z, extent=[left * scale, right * scale, bottom * scale, top * scale], cmap="gist_earth",
                          interpolation="nearest")
    fig.colorbar(image, ax=ax_map, shrink=0.8, label="Elevation at the start (m)")
    styles = {"present": dict(color="black", lw=2.2, ls="-"), "best": dict(color="crimson", lw=2.0, ls="-"),
              "low": dict(color="royalblue", lw=1.4, ls="--"), "high": dict(color="darkorange", lw=1.4, ls="--")}
    drawn = [("present", result.present)] + [(kind, run.lines) for kind, run in _layer_runs(result)[:3]]
    for kind, lines in drawn:
        for i, line in enumerate(lines):
            label = None if i else {"present": "present divide", "best": f"in {result.years:,.0f} yr (central)",
                                    "low": "band: low", "high": "band: high"}[kind]
            ax_map.plot(np.asarray(line.x) * scale, np.asarray(line.y) * scale, label=label, **styles[kind])
    ax_map.set_xlabel(f"x ({unit})")
    ax_map.set_ylabel(f"y ({unit})")
    ax_map.set_title(f"Side a: {result.side_a}   side b: {result.side_b}", fontsize=10)
    ax_map.legend(loc="best", fontsize=8, framealpha=0.85)
    if geographic:
        ax_map.set_aspect(1.0 / max(np.cos(np.radians(0.5 * (bottom + top))), 1e-6))

    band = result.band
    t = result.times / 1e3
    ax_t.fill_between(t, band["low"], band["high"], color="0.8", label="ensemble range")
    ax_t.plot(t, band["best"], color="crimson", lw=2.0, label="central run")
    ax_t.axhline(0.0, color="black", lw=0.8)
    ax_t.set_xlabel("Years from now (thousands)")
    ax_t.set_ylabel("Divide displacement (m, + into side b)")
    ax_t.legend(loc="best", fontsize=8)
    ax_t.set_title("Screening estimate: timescales depend on solver, step, grid\n"
                   "(Forte & Barnhart 2024) and on the calibration", fontsize=9)
    buf = io.BytesIO()
    fig.canvas.print_png(buf)
    return buf.getvalue()


# ------------------------------------------------------------------ writing
def write_outputs(out: str | os.PathLike, files: dict[str, bytes], *, overwrite: bool = False) -> Path:
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

    with staged_output(out, overwrite=overwrite) as tmp:
        for name, data in files.items():
            with atomic_write(tmp / name, parents=True) as part:
                part.write_bytes(data)
    return Path(os.path.abspath(os.fspath(out)))
