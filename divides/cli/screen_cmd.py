"""``divides screen``: every divide of a DEM between basins above a minimum area, ranked by instability.

Options are checked before the DEM is read and the output folder before any
work; numpy, rasterio and numba are imported inside the function so that
``divides --help`` stays fast.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated

import typer

from divides.cli import options as opt
from divides.cli.assess_cmd import (
    HOLD_SECONDS,
    DemErrorLengthOption,
    DemErrorOption,
    ErodibilityAlias,
    ErodibilityRasterOption,
    RunoffAlias,
    RunoffOption,
    SlopeExponentOption,
    UpliftAlias,
    UpliftRasterOption,
    _read_raster_on_grid,
    check_raster_paths,
)

__all__ = ["screen", "LEVEL_CHOICES"]

#: Accepted ``--level`` values (``divides.terrain.basins.LEVELS``, repeated to keep --help light).
LEVEL_CHOICES = ("tributaries", "outlets", "edges")

MinBasinAreaOption = Annotated[
    str | None,
    typer.Option("--min-basin-area", metavar="M2", show_default=False,
                 help="Smallest basin whose divides are screened (m²); default 5 × the channel area."),
]
LevelOption = Annotated[
    str,
    typer.Option("--level", metavar="LEVEL",
                 help="Basins to compare: 'tributaries' (outlet basins split where two large branches join), "
                 "'outlets' (one basin per outlet) or 'edges' (the land draining off each DEM edge)."),
]
MaxSegmentOption = Annotated[
    str | None,
    typer.Option("--max-segment", metavar="M", show_default=False,
                 help="Cut longer divide segments into pieces of at most this length (m); default 100 cells."),
]
# the bounds are divides.assess.screen's CHANNEL_AREA_MIN_CELLS and CHANNEL_AREA_SHARE, repeated to keep --help
# light (tests/cli check they agree)
ScreenChannelAreaOption = Annotated[
    str | None,
    typer.Option("--channel-area", metavar="M2", show_default=False,
                 help="Drainage area (m²) where channels begin; default: read from the DEM's slope-area data, at least "
                 "50 cells and at most 0.2 % of its valid area."),
]
ScreenThetaOption = Annotated[
    str,
    typer.Option("--theta", metavar="VALUE", help="Concavity m/n for χ (a number; estimate it with "
                 "'divides inspect')."),
]
WorkersOption = Annotated[
    int | None,
    typer.Option("--workers", min=1, metavar="N", show_default=False,
                 help="Threads screening segments (and routing tiles with --tiled) in parallel (Dask tasks); "
                 "default: every core."),
]
SchedulerOption = Annotated[
    str | None,
    typer.Option("--scheduler", metavar="ADDRESS", show_default=False,
                 help="Run the divide segments (and the tiles of --tiled) as tasks on an existing Dask cluster "
                 "(e.g. tcp://10.0.0.5:8786)."),
]
ScreenForwardRunOption = Annotated[
    bool,
    typer.Option("--forward-run/--no-forward-run",
                 help="Read the landscape evidence beside the near-divide measures: two forward runs of the whole "
                      "DEM under its steady balance (0.3 response times; one uplift rate, and one per outlet basin) "
                      "and the hilltop curvature next to each segment (default; fewer alarms in steady landscapes "
                      "on the regional benchmark, docs/validation.md; segments then rank by a score, and the "
                      "instability is it never above P(moving), the calibrated probability of motion). "
                      "--no-forward-run: the near-divide measures alone (a calibrated probability), a few seconds "
                      "sooner."),
]
TopOption = Annotated[int, typer.Option("--top", min=0, metavar="N", help="Segments listed on the terminal.")]


def screen(
    dem: opt.DemArgument,
    min_basin_area: MinBasinAreaOption = None,
    level: LevelOption = "tributaries",
    max_segment: MaxSegmentOption = None,
    theta: ScreenThetaOption = "0.45",
    n: SlopeExponentOption = None,
    channel_area: ScreenChannelAreaOption = None,
    dem_error: DemErrorOption = None,
    dem_error_length: DemErrorLengthOption = None,
    runoff: RunoffOption = None,
    erodibility: ErodibilityRasterOption = None,
    uplift: UpliftRasterOption = None,
    closed_edges: opt.ClosedEdgesOption = None,
    workers: WorkersOption = None,
    scheduler: SchedulerOption = None,
    forward_run: ScreenForwardRunOption = True,
    tiled: opt.TiledOption = False,
    scratch: opt.ScratchOption = None,
    seed: opt.SeedOption = 0,
    top: TopOption = 10,
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
    runoff_alias: RunoffAlias = None,
    erodibility_alias: ErodibilityAlias = None,
    uplift_alias: UpliftAlias = None,
) -> None:
    """Screen every divide of a DEM and rank the segments by instability.

    Writes segments.geojson (RFC 7946), segments.csv, screening.json, a
    regional map and report.html to --out, and lists the least stable
    segments (among those scored 0.01 or more, the ones with a known
    direction of motion first). A screening ranks where to look first:
    assess a divide of interest with 'divides assess', and verify in the
    field; local codes and licensed professionals decide.
    \f
    Exit codes: 0 done; 2 a bad input or option (one line on stderr, nothing
    written); 1 an internal error.
    """
    read = opt.dem_options(dem, band=band, bounds=bounds, vertical_unit=vertical_unit, cell_size=cell_size)
    route = opt.route_options(conditioning=conditioning, sea_level=sea_level, closed_edges=closed_edges,
                              voids=voids)
    # The tiles run where the segments run: this machine's threads, or the cluster.
    by_tiles = opt.tiled_options(tiled, scratch, conditioning=route.conditioning, workers=workers, scheduler=scheduler)
    level = opt.parse_choice(level, option="--level", choices=LEVEL_CHOICES)
    theta_value = opt.parse_bounded(theta, option="--theta", unit="(m/n)", low=0, high=2,
                                    typical="0.35 to 0.6 in most rivers")
    options = {
        "theta": theta_value,
        "channel_area_m2": opt.parse_bounded(channel_area, option="--channel-area", unit="m²", low=0,
                                             high=float("inf"), typical="often 1e4 to 1e6 m²"),
        "seed": seed, "conditioning": route.conditioning, "sea_level_m": route.sea_level,
        "closed_edges": route.closed_edges, "voids": route.voids,
    }
    if n is not None:  # the landscape runs and the basins' transience read it
        options["n"] = opt.parse_bounded(n, option="--n", unit="(slope exponent)", low=0.5, high=4,
                                         low_inclusive=True, typical="1 unless known otherwise")
    if dem_error is not None:
        options["dem_error_m"] = opt.parse_bounded(dem_error, option="--dem-error", unit="m", low=0, high=100,
                                                   low_inclusive=True)
    if dem_error_length is not None:
        options["dem_error_length_m"] = opt.parse_bounded(dem_error_length, option="--dem-error-length", unit="m",
                                                          low=0, high=1e5, low_inclusive=True)
    min_area = opt.parse_bounded(min_basin_area, option="--min-basin-area", unit="m²", low=0, high=float("inf"))
    max_len = opt.parse_bounded(max_segment, option="--max-segment", unit="m", low=0, high=float("inf"))
    rasters = check_raster_paths(runoff=runoff, erodibility=erodibility, uplift=uplift,
                                 aliases={"--runoff": runoff_alias, "--erodibility": erodibility_alias,
                                          "--uplift": uplift_alias})
    folder = opt.check_out_dir(out if out is not None else opt.default_out_dir(read.path, "screen"),
                               overwrite=overwrite)
    progress = opt.Progress(3, quiet=quiet)
    with opt.quiet_warnings(quiet):
        from divides.assess.screen import screen as run_screen
        from divides.cli.dem_checks import check_closed_edges, check_enough_cells, check_options_against_dem
        from divides.report.follow_up import basin_sides
        from divides.report.screening import write_screening
        from divides.terrain.tiled_flow import tiled_routing

        # Read and check in silence: a mistake the DEM reveals is one error line, with no progress before it.
        dem_obj, plan = by_tiles.read(read, "screen", "screen a smaller window with --bounds")
        check_enough_cells(dem_obj)
        check_options_against_dem(dem_obj, sea_level=route.sea_level, channel_area=options["channel_area_m2"])
        check_closed_edges(dem_obj, route.closed_edges)
        grids = {k: _read_raster_on_grid(o, p, dem_obj, read) for k, (o, p) in rasters.items()}
        # A mistake found early in the work (no basin above --min-basin-area) stays the only line printed.
        with progress.held(HOLD_SECONDS):
            progress.stage(f"read the DEM {Path(read.path).name} ({dem_obj.shape[0]} x {dem_obj.shape[1]} cells)")
            routing = "" if plan is None else ", routing by tiles"
            progress.stage(f"screening every divide ({dem_obj.shape[0]} x {dem_obj.shape[1]} cells, level {level}"
                           f"{routing})")
            progress.announce_cold_kernels()
            with tiled_routing(plan):
                result = run_screen(dem_obj, min_basin_area_m2=min_area, level=level, max_segment_m=max_len,
                                    workers=workers, scheduler=scheduler, forward_run=forward_run, **grids,
                                    **{k: v for k, v in options.items() if v is not None})
        progress.stage(f"writing the outputs to {folder}")
        sides = basin_sides(result)  # one pass over the grid, for the outputs and the follow-up line below
        written = write_screening(result, folder, overwrite=overwrite, command=opt.current_command(), cli=True,
                                  sides=sides)
    if json_output:  # the document written, provenance included
        typer.echo(json.dumps(json.loads((written / "screening.json").read_text(encoding="utf-8")), indent=2,
                              allow_nan=False))
        return
    from divides.report.screening import area_of, data_notes, directions_text, edge_of, runs_notes

    segs = result.segments
    share = (result.coverage or {}).get("share")
    typer.echo(f"{len(segs)} divide segments between {result.n_basins} basins; {directions_text(segs)}.")
    typer.echo("Coverage: " + ("no divide between outlet basins" if share is None else
                               f"{100 * share:.0f} % of the divides between outlet basins judged")
               + f"; {len(result.gaps)} stretches not assessed (layers/screen_gaps.geojson); the screened basins "
               f"cover {100 * result.coverage.get('screened_area_share', 1.0):.0f} % {area_of(result.parameters)}.")
    if segs and top:
        from divides.report.labels import probability_text
        from divides.report.screening import (LIKELY_MOTION, SMALL_SCORE_NOTE, confidence_text, likely_motion,
                                              small_score)

        typer.echo(f"{'rank':>4}  {'instab.':>7}  {'P(mov.)':>7}  {'conf.':>7}  {'length m':>9}  {'basins':>11}  "
                   f"{'toward':>6}  bearing")
        unlikely = False
        for s in segs[:top]:
            toward = ("-" if s["moves_toward_basin"] is None else str(s["moves_toward_basin"]) if likely_motion(s)
                      else f"({s['moves_toward_basin']})")
            unlikely |= toward.startswith("(")
            bearing = "-" if s["motion_azimuth_deg"] is None else f"{s['motion_azimuth_deg']:.0f}°"
            instab, conf = probability_text(s["instability"]), confidence_text(s)
            moving = probability_text(s.get("motion_probability"))
            typer.echo(f"{s['rank']:>4}  {instab:>7}  {moving:>7}  {conf:>7}  {s['length_m']:9,.0f}  "
                       f"{s['basins'][0]:>5} | {s['basins'][1]:<3}  {toward:>6}  {bearing}")
        if unlikely:
            typer.echo("(n): the direction the near-divide measures favour; motion unlikely "
                       f"(P(moving) < {LIKELY_MOTION:g}).")
        if any(small_score(s) for s in segs[:top]):
            typer.echo(SMALL_SCORE_NOTE[:1].upper() + SMALL_SCORE_NOTE[1:])

    if level == "edges" and segs:  # the labels are the edges' own
        named = sorted({b for s in segs for b in s["basins"]})
        typer.echo("Basins are the land draining off each edge: " + ", ".join(f"{b} {edge_of(b)}" for b in named)
                   + ".")
    if segs and top:  # the next step for the segment to assess first (the report lists more)
        from divides.report.follow_up import assess_command, follow_up_segments

        first = follow_up_segments(segs, limit=1)[0]
        command = assess_command(result, first, sides, dem_file=str(read.path),
                                 command=opt.current_command())
        typer.echo(f"Assess the divide of rank {first['rank']} in full: {command}")
    for note in [*runs_notes(result), *data_notes(result)]:
        typer.echo(f"Caution: {note}")
    typer.echo("A screening ranks where to look first; verify in the field. Local codes and licensed "
               "professionals decide.")
    typer.echo(f"Report:  {written / 'report.html'}")
