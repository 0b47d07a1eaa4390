"""``divides inspect``: what a DEM is, and how it drains.

numpy, rasterio and numba are imported inside the functions, not here, so
that ``divides --help`` does not pay for them.
"""

from __future__ import annotations

import json
from typing import Any

import typer

from divides.cli import options as opt

__all__ = ["inspect", "inspect_report", "suggest_parameters", "format_report", "SCHEMA", "TOP_BASINS", "THETA_BOOTSTRAP"]

#: Identifies the layout of ``divides inspect --json``.
SCHEMA = "divides.inspect/1"

#: How many of the largest basins are listed.
TOP_BASINS = 5

#: Bootstrap resamples of the collinearity θ interval (fewer than an assessment: inspect is a quick look).
THETA_BOOTSTRAP = 50


def inspect(
    dem: opt.DemArgument,
    json_output: opt.JsonOption = False,
    quiet: opt.QuietOption = False,
    band: opt.BandOption = None,
    bounds: opt.BoundsOption = None,
    vertical_unit: opt.VerticalUnitOption = "m",
    cell_size: opt.CellSizeOption = None,
    sea_level: opt.SeaLevelOption = None,
    conditioning: opt.ConditioningOption = "fill",
    voids: opt.VoidsOption = "fill",
    closed_edges: opt.ClosedEdgesOption = None,
) -> None:
    """Describe a DEM: its grid, georeference, elevations, how it drains, and suggested parameters.

    Prints the CRS, grid size, cell size in metres, bounds, share of valid
    cells, elevation range, what conditioning changed, the number of outlets,
    the largest basins with their outlets, and a suggested channel area and
    concavity θ for `divides assess`, each with the reason.
    \f
    With ``--json`` one JSON object is printed on stdout, with the keys:

    ``schema``
        ``"divides.inspect/1"``.
    ``path``, ``band``
        The DEM file and the band read.
    ``crs``, ``crs_kind``, ``crs_unit``
        The CRS as text (null without one); ``"projected"``, ``"geographic"``
        or ``"none"``; the unit of its coordinates (``"metre"``, ``"degree"``…; null without CRS).
    ``shape``, ``n_cells``
        ``[rows, cols]`` and ``rows * cols``.
    ``cell_size_m``, ``cell_width_range_m``, ``cell_height_range_m``
        Median ``[dx, dy]`` in metres, and ``[min, max]`` of the width and the
        height across rows (they differ on geographic grids only).
    ``bounds``
        ``[left, bottom, right, top]`` in CRS units.
    ``valid_share``
        Fraction (0–1) of the cells holding an elevation.
    ``interior_nodata_cells``, ``voids``
        Nodata cells in holes inside the data (not reaching the grid's edge), and ``handling`` (``"fill"``:
        filled by harmonic interpolation before routing; ``"outlets"``: their rims drain into them), ``holes``,
        ``cells``, ``largest_cells``, ``filled_cells`` (:func:`divides.terrain.voids.fill_voids`).
    ``elevation_m``, ``vertical_unit``
        ``[min, max]`` in metres; the unit the file stores them in.
    ``conditioning``
        ``method``, ``sea_level_m``, ``filled_cells``, ``filled_area_m2``,
        ``filled_volume_m3``, ``carved_cells``, ``carved_volume_m3``.
    ``n_outlets``
        Cells that drain off the DEM (each one is the outlet of a basin).
    ``n_outlets_draining_others``
        Outlets that drain at least one other cell (the rest are one-cell basins on the edge).
    ``largest_basins``
        Up to five objects, largest first: ``id`` (1 = largest, as in
        ``FlowGraph.basins()``), ``area_km2``, ``share`` (fraction of the valid
        area), ``outlet`` (``[x, y]`` of the outlet cell centre, CRS units).
    ``suggested``
        Parameters for ``divides assess``: ``channel_area_m2``
        (``value``, ``cells``, ``source``: ``"slope-area break"`` or
        ``"fallback"``, ``reason``), ``screen_channel_area_m2`` (``value``,
        ``cells``, ``reason``: what ``divides screen`` reads without
        ``--channel-area``, the same bounded) and ``theta`` (``value``, ``ci95``,
        ``source``: ``"collinearity"``, ``"slope-area"`` or ``"reference"``,
        ``reason``, and both estimates under ``collinearity`` and
        ``slope_area``: ``value``, ``ci95``, ``n_units``, ``note``).
    """
    read = opt.dem_options(dem, band=band, bounds=bounds, vertical_unit=vertical_unit, cell_size=cell_size)
    flow = opt.route_options(conditioning=conditioning, sea_level=sea_level, closed_edges=closed_edges,
                             voids=voids)
    with opt.quiet_warnings(quiet):
        report = inspect_report(read, flow)
    # Everything is computed before anything is printed: a failure prints no partial output.
    typer.echo(json.dumps(report, indent=2, allow_nan=False) if json_output else format_report(report))


def inspect_report(read: opt.DemOptions, flow_options: opt.RouteOptions, *, top: int = TOP_BASINS) -> dict[str, Any]:
    """Read and route a DEM and gather what ``divides inspect`` prints.

    Parameters
    ----------
    read : DemOptions
        The DEM and how to read it.
    flow_options : RouteOptions
        Conditioning and sea level for the routing.
    top : int
        Number of largest basins to list.

    Returns
    -------
    dict
        JSON-ready; keys as documented in :func:`inspect`.
    """
    import numpy as np

    import divides

    from divides.cli.dem_checks import check_closed_edges, check_options_against_dem
    from divides.io.memory import MemoryNeed

    need = MemoryNeed.of("inspect", "inspect a smaller window with --bounds")
    dem = divides.read_dem(read.path, **read.read_kwargs(), memory=need)
    # a flat DEM or a sea above the land has no drainage to describe and nothing to suggest
    check_options_against_dem(dem, sea_level=flow_options.sea_level)
    check_closed_edges(dem, flow_options.closed_edges)
    from divides.terrain.voids import fill_voids

    filled, voids = fill_voids(dem, flow_options.voids)  # before routing, as assess and screen do
    graph = divides.route(filled, **flow_options.route_kwargs())

    crs = dem.crs
    if crs is None:
        kind, unit = "none", None
    elif crs.is_geographic:
        kind, unit = "geographic", crs.units_factor[0]
    else:
        kind, unit = "projected", crs.linear_units_factor[0]

    described = dem.describe()  # the DEM as given
    valid_area = filled.valid_area_m2  # the basins' land
    outlets = graph.outlets
    labels = graph.basins().ravel()
    area = graph.area.ravel()
    # Rank by the basin ids themselves (1 = largest) so the listing agrees with basins().
    ids = labels[outlets]
    chosen = np.argsort(ids, kind="stable")[:top]
    rows, cols = np.divmod(outlets[chosen], dem.shape[1])
    xs, ys = dem.xy(rows, cols)
    basins = [
        {
            "id": int(ids[k]),
            "area_km2": float(area[outlets[k]]) / 1e6,
            "share": float(area[outlets[k]]) / valid_area,
            "outlet": [float(x), float(y)],
        }
        for k, x, y in zip(chosen, xs, ys, strict=True)
    ]

    conditioned = graph.conditioned.summary()
    return {
        "schema": SCHEMA,
        "path": dem.path,
        "band": dem.meta.get("band", read.band),
        "crs": described["crs"],
        "crs_kind": kind,
        "crs_unit": unit,
        "shape": described["shape"],
        "n_cells": dem.size,
        "cell_size_m": described["cell_size_m"],
        "cell_width_range_m": [float(np.min(dem.dx)), float(np.max(dem.dx))],
        "cell_height_range_m": [float(np.min(dem.dy)), float(np.max(dem.dy))],
        "bounds": [float(b) for b in described["bounds"]],
        "valid_share": described["valid_share"],
        "interior_nodata_cells": voids.cells,
        "voids": voids.to_dict(),
        "elevation_m": described["elevation_m"],
        "vertical_unit": dem.vertical_unit,
        "conditioning": {
            "method": conditioned["method"],
            "sea_level_m": flow_options.sea_level,
            "filled_cells": int(conditioned["filled_cells"]),
            "filled_area_m2": float(conditioned["filled_area_m2"]),
            "filled_volume_m3": float(conditioned["filled_volume_m3"]),
            "carved_cells": int(conditioned["carved_cells"]),
            "carved_volume_m3": float(conditioned["carved_volume_m3"]),
        },
        "n_outlets": int(outlets.size),
        "n_outlets_draining_others": int(np.count_nonzero(graph.upstream_count[outlets] > 1)),
        "largest_basins": basins,
        "suggested": suggest_parameters(graph),
    }


def _finite(value: float | None) -> float | None:
    """The value as a float, or None when missing or not finite (JSON has no NaN)."""
    import math

    return float(value) if value is not None and math.isfinite(value) else None


def _interval(ci: tuple[float, float]) -> list[float | None]:
    return [_finite(v) for v in ci]


def suggest_parameters(graph: Any) -> dict[str, Any]:
    """Channel area and θ suggested for ``divides assess``, each with its reason.

    The channel area is where the DEM's slope–area data break from hillslope
    to channel scaling (:func:`divides.terrain.channels.suggest_channel_threshold`).
    θ is the collinearity estimate over the whole channel network (tributaries
    collapse onto their trunk in χ–z); slope–area regression is the check,
    and its value is used when collinearity cannot tell. When neither can,
    the reference θ = 0.45 (common practice) is suggested.

    Parameters
    ----------
    graph : FlowGraph

    Returns
    -------
    dict
        JSON-ready; keys as documented under ``suggested`` in :func:`inspect`.
    """
    import math

    import numpy as np

    from divides.assess.screen import CHANNEL_AREA_MIN_CELLS, CHANNEL_AREA_SHARE
    from divides.errors import DividesError
    from divides.profiles.analysis import network_concavity
    from divides.profiles.concavity import REFERENCE_THETA, THETA_GRID, bounded_by_data
    from divides.terrain.channels import bounded_channel_threshold, extract_channels, suggest_channel_threshold

    choice = suggest_channel_threshold(graph)
    cell = float(np.median(graph.dem.cell_area))
    area = {"value": float(choice.value_m2), "cells": float(choice.value_m2 / cell), "source": choice.source,
            "reason": choice.reason}
    bounded = bounded_channel_threshold(graph, max_share=CHANNEL_AREA_SHARE, min_cells=CHANNEL_AREA_MIN_CELLS,
                                        choice=choice)
    screen_area = {"value": float(bounded.value_m2), "cells": float(bounded.value_m2 / cell), "reason": bounded.reason}
    estimates: dict[str, Any] = {}
    try:
        channels = extract_channels(graph, threshold_m2=choice.value_m2)
        estimates = network_concavity(channels, n_boot=THETA_BOOTSTRAP)
    except DividesError as exc:  # e.g. too few channels for either method
        problem = str(exc)
    else:
        problem = ""
    found = {k: e for k, e in estimates.items() if math.isfinite(e.value)}
    loose = {k: e for k, e in found.items() if not bounded_by_data(e)}  # round 70: not bounded by the data
    collinear, slope_area = (found.get(k) if k not in loose else None for k in ("collinearity", "slope_area"))

    def words(e: Any) -> str:
        lo, hi = _interval(e.ci95)
        ci = "" if lo is None or hi is None else f", 95 % interval {lo:.2f} to {hi:.2f}"
        return f"{e.value:.2f}{ci}"

    if collinear is not None:
        value, ci, source = collinear.value, collinear.ci95, "collinearity"
        reason = f"tributaries line up best with their trunks in χ–z at θ = {words(collinear)} ({collinear.n_units} links)"
        if slope_area is not None:
            lo, hi = _interval(collinear.ci95)
            agrees = lo is not None and hi is not None and lo <= slope_area.value <= hi
            reason += f"; slope–area gives {words(slope_area)}, {'which agrees' if agrees else 'which differs: check the profiles'}"
    elif slope_area is not None:
        value, ci, source = slope_area.value, slope_area.ci95, "slope-area"
        why = estimates["collinearity"].note if "collinearity" in estimates else problem
        if "collinearity" in loose:
            why = f"its θ = {words(loose['collinearity'])} is not bounded by the data"
        reason = f"slope–area regression of the channels gives θ = {words(slope_area)}; collinearity could not tell" + (
            f" ({why})" if why else "")
    else:
        value, ci, source = REFERENCE_THETA, (float("nan"), float("nan")), "reference"
        searched = f"{THETA_GRID[0]:.2f}–{THETA_GRID[-1]:.2f}"
        notes = "; ".join(filter(None, [problem, *(f"{k.replace('_', '–')} gives θ = {words(e)}, an interval that "
                                                   f"reaches the end of the {searched} searched or beyond"
                                                   if k in loose else e.note for k, e in estimates.items())]))
        what = "the data do not bound θ" if loose else "neither collinearity nor slope–area could estimate θ"
        reason = f"{what}{f' ({notes})' if notes else ''}; the reference value {REFERENCE_THETA} is common practice"
    return {
        "channel_area_m2": area,
        "screen_channel_area_m2": screen_area,
        "theta": {
            "value": float(value),
            "ci95": _interval(ci),
            "source": source,
            "reason": reason,
            **{k: {"value": _finite(e.value), "ci95": _interval(e.ci95), "n_units": int(e.n_units),
                   "note": e.note} for k, e in estimates.items()},
        },
    }


def _num(value: float) -> str:
    """A short number: whole with thousands separators from 1000 up, else 4 significant digits."""
    return f"{value:,.0f}" if abs(value) >= 1000 else f"{value:.4g}"


def _range(lo: float, hi: float, unit: str) -> str:
    low, high = _num(lo), _num(hi)
    return f"{low} {unit}" if low == high else f"{low} to {high} {unit}"


def format_report(report: dict[str, Any]) -> str:
    """The plain-text form of :func:`inspect_report`'s result (aligned, no colour).

    Parameters
    ----------
    report : dict
        As returned by :func:`inspect_report`.

    Returns
    -------
    str
        Several lines, without a trailing newline.
    """
    rows, cols = report["shape"]
    kind, unit = report["crs_kind"], report["crs_unit"]
    if kind == "none":
        crs_text = "none (local grid; cell size from --cell-size)"
    else:
        crs = report["crs"]
        if len(crs) > 60:  # a long WKT: its first quoted string is the CRS name
            crs = crs.split('"')[1] if '"' in crs else crs[:57] + "..."
        crs_text = f"{crs} ({kind}, unit {unit})"

    dx_lo, dx_hi = report["cell_width_range_m"]
    dy_lo, dy_hi = report["cell_height_range_m"]
    if dx_lo == dx_hi and dy_lo == dy_hi:
        cell_text = f"{_num(dx_lo)} x {_num(dy_lo)} m"
    else:
        cell_text = f"width {_range(dx_lo, dx_hi, 'm')}, height {_range(dy_lo, dy_hi, 'm')} (varies across rows)"

    # Ten significant digits keep a projected metre or about 1e-4 degree (≈10 m).
    bounds_text = ", ".join(f"{v:.10g}" for v in report["bounds"])
    bounds_text += f" (left, bottom, right, top{'' if unit is None else '; ' + unit})"

    zmin, zmax = report["elevation_m"]
    z_text = f"{zmin:.2f} to {zmax:.2f} m"
    if report["vertical_unit"] != "m":
        z_text += f" (stored in {report['vertical_unit']}, converted)"

    cond = report["conditioning"]
    cond_text = (
        f"{cond['method']}: {cond['filled_cells']:,} cells raised, "
        f"{_num(cond['filled_area_m2'] / 1e6)} km², {_num(cond['filled_volume_m3'])} m³"
    )
    if cond["method"] == "breach":
        cond_text += f"; {cond['carved_cells']:,} cells lowered, {_num(cond['carved_volume_m3'])} m³"
    if cond["sea_level_m"] is not None:
        cond_text += f"; sea level {cond['sea_level_m']:g} m"

    lines = [
        ("DEM", report["path"] + ("" if report["band"] in (None, 1) else f" (band {report['band']})")),
        ("CRS", crs_text),
        ("Grid", f"{rows:,} rows x {cols:,} cols = {report['n_cells']:,} cells"),
        ("Cell size", cell_text),
        ("Bounds", bounds_text),
        ("Valid cells", f"{100 * report['valid_share']:.2f} %" + (
            f"; {report['interior_nodata_cells']:,} nodata cells inside the data"
            + (" filled by harmonic interpolation (--voids outlets leaves them as outlets, for water)"
               if report["voids"]["filled_cells"] else
               ": their rims drain into them as outlets (for water; --voids fill fills voids)")
            if report["interior_nodata_cells"] else "")),
        ("Elevation", z_text),
        ("Conditioning", cond_text),
        ("Outlets", f"{report['n_outlets']:,} ({report['n_outlets_draining_others']:,} draining more than their own cell)"),
    ]
    width = max(len(label) for label, _ in lines) + 2
    out = [f"{label:<{width}}{value}" for label, value in lines]

    suggested = report["suggested"]
    area, theta = suggested["channel_area_m2"], suggested["theta"]
    out.append(f"{'Channel area':<{width}}{_num(area['value'])} m² ({_num(area['cells'])} cells): {area['reason']}"
               f" -> --channel-area {area['value']:.6g}")
    bounded = suggested["screen_channel_area_m2"]
    if bounded["value"] != area["value"]:
        from divides.assess.screen import CHANNEL_AREA_MIN_CELLS, CHANNEL_AREA_SHARE

        out.append(f"{'':<{width}}(screen without --channel-area reads {_num(bounded['value'])} m² "
                   f"({_num(bounded['cells'])} cells): at least {CHANNEL_AREA_MIN_CELLS:g} cells, at most "
                   f"{100 * CHANNEL_AREA_SHARE:g} % of the valid area)")
    out.append(f"{'Theta':<{width}}{theta['value']:.2f} ({theta['source']}): {theta['reason']}"
               f" -> --theta {theta['value']:.2f}" + (" or --theta auto" if theta["source"] == "collinearity" else ""))
    if theta["source"] != "reference":
        from divides.profiles.concavity import REFERENCE_THETA

        out.append(f"{'':<{width}}(assess, screen and the demo use the reference θ = {REFERENCE_THETA:.2f} of "
                   "common practice unless told otherwise: the value above is this DEM's own estimate)")

    basins = report["largest_basins"]
    out.append(f"Largest basins ({len(basins)})")
    table = [("id", "area km²", "share", "outlet x", "outlet y")]
    for b in basins:
        x, y = b["outlet"]
        table.append((str(b["id"]), _num(b["area_km2"]), f"{100 * b['share']:.1f} %", f"{x:.10g}", f"{y:.10g}"))
    widths = [max(len(row[i]) for row in table) for i in range(len(table[0]))]
    for row in table:
        out.append("  " + "  ".join(cell.rjust(w) for cell, w in zip(row, widths, strict=True)))
    return "\n".join(out)
