"""``divides demo``: the invented Harrowmere Uplands, assessed end to end.

The demo DEM (``demo/uplands.tif``) was grown with the project's own
forward model; ``demo/README.md`` tells its story and ``demo/make_demo_dem.py``
remakes it. The command runs the same assessment a user would type::

    divides assess demo/uplands.tif --side-a west --side-b east \\
        --name-a "River Tallow" --name-b "Quern Water" \\
        --closed-edges north,south --erosion-rate-a 0.70 --out divides-demo
"""

from __future__ import annotations

from pathlib import Path

import typer

from divides.cli import assess_cmd
from divides.cli import options as opt
from divides.errors import DemReadError

__all__ = ["demo", "demo_dem_path", "DEMO_OPTIONS", "DEMO_CLOSED_EDGES", "DEMO_TRUTH", "DEFAULT_OUT"]

#: Default output folder, in the working folder.
DEFAULT_OUT = "divides-demo"

#: The options of the demo's assessment, as typed on the command line.
DEMO_OPTIONS = {
    "side_a": "west",  # the River Tallow's side
    "side_b": "east",  # the Quern Water's side
    "erosion_rate_a": "0.70",  # the story's cosmogenic sample from the Tallow side (mm/yr)
    "name_a": "River Tallow",
    "name_b": "Quern Water",
}

#: ``--closed-edges`` of the demo: the model's north and south edges were walls.
DEMO_CLOSED_EDGES = "north,south"

#: What the model did after the snapshot that became the demo DEM (the GeoTIFF's tags, rounded):
#: the divide moved this far east (m) in this many years.
DEMO_TRUTH = {"divide_shift_m": 157.0, "years": 3e5, "speed_mm_yr": 0.52}


def demo_dem_path() -> Path:
    """Where the demo DEM is: ``demo/uplands.tif`` beside the package in a source checkout.

    Raises
    ------
    DemReadError
        The package was installed without its source folder.
    """
    import divides

    path = Path(divides.__file__).resolve().parent.parent / "demo" / "uplands.tif"
    if not path.is_file():
        raise DemReadError(
            f"the demo DEM '{path}' is missing: the demo ships with the source, so clone the repository "
            "and run 'pip install -e .' there (or remake it with 'python demo/make_demo_dem.py')"
        )
    return path


def demo(
    out: opt.OutOption = None,
    overwrite: opt.OverwriteOption = False,
    no_robustness: assess_cmd.NoRobustnessOption = False,
    json_output: opt.JsonOption = False,
    quiet: opt.QuietOption = False,
) -> None:
    """Run the bundled demo: an invented landscape where one basin is capturing another.

    Assesses the divide of the Harrowmere Uplands (an invented place) between
    the River Tallow (side a, west) and the Quern Water (side b, east), writes
    the report to --out (default ./divides-demo) and prints the verdict and
    where the report is. demo/README.md tells the story.
    """
    path = demo_dem_path()
    read = opt.dem_options(str(path))
    route = opt.route_options(closed_edges=DEMO_CLOSED_EDGES)
    request = assess_cmd.assess_request(**DEMO_OPTIONS, robustness=not no_robustness, route=route)
    folder = opt.check_out_dir(out if out is not None else Path.cwd() / DEFAULT_OUT, overwrite=overwrite)
    progress = opt.Progress(3, quiet=quiet)
    with opt.quiet_warnings(quiet):
        result, written = assess_cmd.run_assessment(read, request, out=folder, overwrite=overwrite, progress=progress)
    assess_cmd.print_result(result, written, json_output=json_output)
    if not json_output:
        typer.echo("")
        typer.echo(
            f"The demo's truth: in the model run that made this landscape, the divide went on to move "
            f"{DEMO_TRUTH['divide_shift_m']:.0f} m east, into the Quern Water's side, in the next "
            f"{DEMO_TRUTH['years']:,.0f} years (about {DEMO_TRUTH['speed_mm_yr']:.2f} mm/yr). "
            "See demo/README.md for the story."
        )
