"""Options shared by the ``divides`` commands, and the parsing of their values.

Numeric options are taken as text and parsed here, so that every malformed
value ends in one :class:`~divides.errors.ParameterError` naming the option,
the value and what is accepted. This module is imported when the command line
starts: it must stay free of numpy, rasterio and numba.
"""

from __future__ import annotations

import contextlib
import math
import os
import sys
import threading
import time
import warnings
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any, TextIO

import typer

from divides.errors import DemReadError, DividesError, OutputError, ParameterError

__all__ = [
    "VERTICAL_UNIT_CHOICES",
    "CONDITIONING_CHOICES",
    "DemArgument",
    "JsonOption",
    "QuietOption",
    "BandOption",
    "BoundsOption",
    "VerticalUnitOption",
    "CellSizeOption",
    "SeaLevelOption",
    "ConditioningOption",
    "DemOptions",
    "TiledOption",
    "ScratchOption",
    "TileWorkersOption",
    "TileSchedulerOption",
    "TiledOptions",
    "tiled_options",
    "RouteOptions",
    "check_dem_path",
    "parse_number",
    "parse_bounds",
    "parse_cell_size",
    "parse_choice",
    "dem_options",
    "route_options",
    "quiet_warnings",
    "EDGE_CHOICES",
    "SideAOption",
    "SideBOption",
    "LonLatOption",
    "OutOption",
    "OverwriteOption",
    "SeedOption",
    "ClosedEdgesOption",
    "parse_theta",
    "parse_closed_edges",
    "parse_bounded",
    "default_out_dir",
    "check_out_dir",
    "Progress",
    "NameAOption",
    "NameBOption",
    "parse_name",
    "pick_alias",
    "set_command",
    "current_command",
    "kernels_cold",
    "KERNELS_COLD_MESSAGE",
]

#: The DEM edges a side SPEC or ``--closed-edges`` may name.
EDGE_CHOICES: tuple[str, ...] = ("north", "south", "east", "west")

#: Accepted ``--vertical-unit`` values; ``divides.io.reading.VERTICAL_UNITS``
#: holds their sizes (repeated here so that ``--help`` need not import rasterio).
VERTICAL_UNIT_CHOICES: tuple[str, ...] = ("m", "ft", "us-ft")

#: Accepted ``--conditioning`` values (``divides.terrain.conditioning.CONDITIONING_METHODS``).
CONDITIONING_CHOICES: tuple[str, ...] = ("fill", "breach")

#: Accepted ``--voids`` values (``divides.terrain.voids.VOID_HANDLING``).
VOID_CHOICES: tuple[str, ...] = ("fill", "outlets")

# ---------------------------------------------------------------- the options
DemArgument = Annotated[
    str,
    typer.Argument(
        metavar="DEM",
        help="The DEM: a single-band GeoTIFF (or any raster rasterio can read).",
        show_default=False,
    ),
]
JsonOption = Annotated[
    bool,
    typer.Option("--json", help="Print one JSON object on stdout instead of text."),
]
QuietOption = Annotated[
    bool,
    typer.Option("--quiet", "-q", help="Print no progress lines or warnings on stderr (errors are still printed)."),
]
BandOption = Annotated[
    int | None,
    typer.Option("--band", min=1, metavar="N", help="Band holding the elevations (1-based); needed when the file has several."),
]
BoundsOption = Annotated[
    str | None,
    typer.Option(
        "--bounds",
        metavar="LEFT,BOTTOM,RIGHT,TOP",
        help="Read only this box, in the DEM's CRS units (widened to whole cells).",
        show_default=False,
    ),
]
VerticalUnitOption = Annotated[
    str,
    typer.Option("--vertical-unit", metavar="m|ft|us-ft", help="Unit of the stored elevations (converted to metres)."),
]
CellSizeOption = Annotated[
    str | None,
    typer.Option(
        "--cell-size",
        metavar="M",
        help="Cell size in metres (M or DX,DY), for DEMs without a CRS; overrides the CRS cell size.",
        show_default=False,
    ),
]
SeaLevelOption = Annotated[
    str | None,
    typer.Option(
        "--sea-level",
        metavar="M",
        help="Cells at or below this elevation (m) drain off the DEM (coasts, held lakes).",
        show_default=False,
    ),
]
ConditioningOption = Annotated[
    str,
    typer.Option(
        "--conditioning",
        metavar="fill|breach",
        help="How depressions are removed before routing: fill them, or breach pits first (high-resolution DEMs).",
    ),
]
VoidsOption = Annotated[
    str,
    typer.Option(
        "--voids",
        metavar="fill|outlets",
        help="Holes of nodata inside the DEM's data: fill them by smooth (harmonic) interpolation from their rims "
        "(voids in the data), or leave them as outlets the land around drains into (water masked out).",
    ),
]

TiledOption = Annotated[
    bool,
    typer.Option(
        "--tiled",
        help="Condition and route the DEM tile by tile (scratch tiles on disk), as done by itself when "
        "in-memory routing would not fit; the analyses after routing still hold the grid in memory.",
    ),
]
ScratchOption = Annotated[
    str | None,
    typer.Option(
        "--scratch",
        metavar="DIR",
        help="Folder for the intermediate tiles of the tiled path (default: the system's temporary folder; "
        "about 19 B per DEM cell).",
        show_default=False,
    ),
]
TileWorkersOption = Annotated[
    int | None,
    typer.Option("--workers", min=1, metavar="N", show_default=False,
                 help="Threads routing the tiles when routing goes by tiles (Dask tasks); default: every core."),
]
TileSchedulerOption = Annotated[
    str | None,
    typer.Option("--scheduler", metavar="ADDRESS", show_default=False,
                 help="When routing goes by tiles, run the tiles as tasks on an existing Dask cluster "
                 "(e.g. tcp://10.0.0.5:8786; its workers must see the DEM and --scratch at the same paths)."),
]


SideAOption = Annotated[
    str,
    typer.Option(
        "--side-a",
        metavar="SPEC",
        help="Side a of the divide: a DEM edge (north, south, east, west: every cell draining off it) "
        "or points 'x,y;x,y' in the DEM's CRS (see --lonlat), each snapped to the largest channel nearby.",
        show_default=False,
    ),
]
SideBOption = Annotated[
    str,
    typer.Option("--side-b", metavar="SPEC", help="Side b of the divide, as for --side-a.", show_default=False),
]
LonLatOption = Annotated[
    bool,
    typer.Option("--lonlat", help="Points in the side SPECs are longitude,latitude (WGS 84), not DEM CRS coordinates."),
]
OutOption = Annotated[
    str | None,
    typer.Option(
        "--out",
        "-o",
        metavar="DIR",
        help="Folder for the outputs (created; default ./divides-<DEM name>-<command> in the working folder).",
        show_default=False,
    ),
]
OverwriteOption = Annotated[
    bool,
    typer.Option("--overwrite", help="Replace an existing --out folder (only an earlier divides output or an empty folder)."),
]
SeedOption = Annotated[
    int,
    typer.Option("--seed", min=0, metavar="N", help="Seed of the bootstrap and the robustness perturbations (whole number >= 0)."),
]
NameAOption = Annotated[
    str | None,
    typer.Option("--name-a", metavar="NAME", show_default=False,
                 help="A name for side a (e.g. the river's), used in the verdict, figures, layers and summary.json."),
]
NameBOption = Annotated[
    str | None,
    typer.Option("--name-b", metavar="NAME", show_default=False, help="A name for side b, as --name-a."),
]
ClosedEdgesOption = Annotated[
    str | None,
    typer.Option(
        "--closed-edges",
        metavar="EDGE[,EDGE]",
        help="DEM edges that are not outlets (the DEM was cut along a ridge there), e.g. north,south.",
        show_default=False,
    ),
]


# ---------------------------------------------------------------- the command as run
_COMMAND: list[str] | None = None


def set_command(argv: list[str] | None) -> None:
    """Remember the arguments of this run (set by :func:`divides.cli.app.run`) for ``provenance.command``."""
    global _COMMAND
    _COMMAND = None if argv is None else [str(a) for a in argv]


def current_command() -> list[str] | None:
    """The arguments of this run after the program name, or None outside :func:`divides.cli.app.run`."""
    return None if _COMMAND is None else list(_COMMAND)


# ---------------------------------------------------------------- parsing
def parse_name(text: str | None, *, option: str) -> str | None:
    """Check a side name: one line of 1 to 60 printable characters.

    Examples
    --------
    >>> parse_name("  River Tallow ", option="--name-a")
    'River Tallow'
    """
    if text is None:
        return None
    name = text.strip()
    if not name or len(name) > 60 or not name.isprintable():
        raise ParameterError(f"{option} {text!r} is not accepted; give a name of 1 to 60 characters on one line")
    return name


def pick_alias(value: Any, old: Any, *, option: str, old_option: str) -> Any:
    """The value of an option given under its name or its older name (not both).

    Examples
    --------
    >>> pick_alias(None, "r.tif", option="--runoff-raster", old_option="--runoff")
    'r.tif'
    """
    if value is not None and old is not None:
        raise ParameterError(f"{option} and {old_option} are the same option ({old_option} is its older name); "
                             f"give {option} once")
    return value if value is not None else old


def check_dem_path(path: str) -> str:
    """Fail early, before any heavy import, when a local DEM file is missing.

    Parameters
    ----------
    path : str
        The DEM argument. GDAL virtual paths (``/vsi...``) and URLs are
        passed through unchecked: only the reader can tell.

    Returns
    -------
    str
        ``path`` unchanged.

    Raises
    ------
    DemReadError
        The path is empty, does not exist or is a directory.
    """
    if not path:
        raise DemReadError("the DEM path is empty; give the path of a GeoTIFF (or another raster rasterio can read)")
    if path.startswith("/vsi") or "://" in path:
        return path
    if not os.path.exists(path):
        raise DemReadError(
            f"DEM file '{path}' does not exist; give the path of a GeoTIFF (or another raster rasterio can read)"
        )
    if os.path.isdir(path):
        raise DemReadError(f"DEM '{path}' is a directory; give the path of a raster file such as a GeoTIFF")
    return path


def parse_number(text: str, *, option: str, accepted: str, positive: bool = False) -> float:
    """Parse one finite number given on the command line.

    Parameters
    ----------
    text : str
        The value as typed.
    option : str
        Option name for the message, e.g. ``"--sea-level"``.
    accepted : str
        What is accepted, in words, for the message.
    positive : bool
        Reject zero and negative values.

    Returns
    -------
    float

    Raises
    ------
    ParameterError
        Not a number, not finite, or not positive when ``positive``.

    Examples
    --------
    >>> parse_number("12.5", option="--sea-level", accepted="metres")
    12.5
    """
    try:
        value = float(text.strip())
    except (AttributeError, ValueError):
        raise ParameterError(f"{option} {text!r} is not a number; give {accepted}") from None
    if not math.isfinite(value) or (positive and value <= 0):
        raise ParameterError(f"{option} {text!r} is not accepted; give {accepted}")
    return value


def parse_bounds(text: str | None) -> tuple[float, float, float, float] | None:
    """Parse ``--bounds LEFT,BOTTOM,RIGHT,TOP``.

    Examples
    --------
    >>> parse_bounds("0, 10, 30, 40")
    (0.0, 10.0, 30.0, 40.0)
    """
    if text is None:
        return None
    accepted = "four numbers LEFT,BOTTOM,RIGHT,TOP in the DEM's CRS units, with LEFT < RIGHT and BOTTOM < TOP"
    parts = text.split(",")
    if len(parts) != 4:
        raise ParameterError(f"--bounds {text!r} has {len(parts)} value(s); give {accepted}")
    try:
        values = tuple(parse_number(p, option="--bounds", accepted=accepted) for p in parts)
    except ParameterError:  # name the whole value, not the one bad part
        raise ParameterError(f"--bounds {text!r} is not four finite numbers; give {accepted}") from None
    left, bottom, right, top = values
    if not (left < right and bottom < top):
        raise ParameterError(f"--bounds {text!r} is an empty box; give {accepted}")
    return values  # type: ignore[return-value]


def parse_cell_size(text: str | None) -> float | tuple[float, float] | None:
    """Parse ``--cell-size M`` or ``--cell-size DX,DY`` (metres, positive).

    Examples
    --------
    >>> parse_cell_size("30"), parse_cell_size("30,25")
    (30.0, (30.0, 25.0))
    """
    if text is None:
        return None
    accepted = "a positive cell size in metres (M, or DX,DY)"
    parts = text.split(",")
    if len(parts) > 2:
        raise ParameterError(f"--cell-size {text!r} has {len(parts)} values; give {accepted}")
    values = [parse_number(p, option="--cell-size", accepted=accepted, positive=True) for p in parts]
    return values[0] if len(values) == 1 else (values[0], values[1])


def parse_choice(text: str, *, option: str, choices: tuple[str, ...]) -> str:
    """Check that ``text`` is one of ``choices`` (case-sensitive).

    Examples
    --------
    >>> parse_choice("ft", option="--vertical-unit", choices=VERTICAL_UNIT_CHOICES)
    'ft'
    """
    if text not in choices:
        raise ParameterError(f"{option} {text!r} is not accepted; use one of: {', '.join(choices)}")
    return text


@dataclass(frozen=True)
class DemOptions:
    """How to read the DEM, checked. ``read_kwargs()`` feeds :func:`divides.read_dem`."""

    path: str
    band: int | None = None
    bounds: tuple[float, float, float, float] | None = None
    vertical_unit: str = "m"
    cell_size: float | tuple[float, float] | None = None

    def read_kwargs(self) -> dict[str, Any]:
        """Keyword arguments of :func:`divides.read_dem` (the path excluded)."""
        return {
            "band": self.band,
            "bounds": self.bounds,
            "vertical_unit": self.vertical_unit,
            "cell_size": self.cell_size,
        }


@dataclass(frozen=True)
class RouteOptions:
    """How to route flow, checked. ``route_kwargs()`` feeds :func:`divides.route`."""

    conditioning: str = "fill"
    sea_level: float | None = None
    closed_edges: tuple[str, ...] = ()
    voids: str = "fill"

    def route_kwargs(self) -> dict[str, Any]:
        """Keyword arguments of :func:`divides.route` (the DEM excluded; ``voids`` is applied before, by
        :func:`divides.terrain.voids.fill_voids`)."""
        return {"conditioning": self.conditioning, "sea_level": self.sea_level, "closed_edges": self.closed_edges}


def dem_options(
    path: str,
    *,
    band: int | None = None,
    bounds: str | None = None,
    vertical_unit: str = "m",
    cell_size: str | None = None,
) -> DemOptions:
    """Check the DEM argument and the reading options as typed.

    Raises
    ------
    DemReadError, ParameterError
        The first problem found, in the order of the arguments.
    """
    return DemOptions(
        path=check_dem_path(path),
        band=band,
        bounds=parse_bounds(bounds),
        vertical_unit=parse_choice(vertical_unit, option="--vertical-unit", choices=VERTICAL_UNIT_CHOICES),
        cell_size=parse_cell_size(cell_size),
    )


def route_options(
    *, conditioning: str = "fill", sea_level: str | None = None, closed_edges: str | None = None,
    voids: str = "fill",
) -> RouteOptions:
    """Check the routing options as typed.

    Raises
    ------
    ParameterError
        Unknown conditioning method, a sea level that is not a finite number,
        closed edges that are not DEM edges, or an unknown handling of voids.
    """
    return RouteOptions(
        conditioning=parse_choice(conditioning, option="--conditioning", choices=CONDITIONING_CHOICES),
        sea_level=None
        if sea_level is None
        else parse_number(sea_level, option="--sea-level", accepted="an elevation in metres"),
        closed_edges=parse_closed_edges(closed_edges),
        voids=parse_choice(voids, option="--voids", choices=VOID_CHOICES),
    )


@dataclass(frozen=True)
class TiledOptions:
    """``--tiled``, ``--scratch`` and where tiles run (``--workers``, ``--scheduler``), checked; :meth:`read`
    reads the DEM and picks in-memory or tiled routing."""

    tiled: bool = False
    scratch: str | None = None
    conditioning: str = "fill"
    workers: int | None = None
    scheduler: str | None = None

    def read(self, read: DemOptions, task: str, remedy: str):
        """Read the DEM under the memory guard and choose how to route it.

        The guard lets the read through when the task fits with in-memory routing or
        with routing by tiles; after the read, routing goes by tiles when ``--tiled``
        was given or in-memory routing would not fit. When neither fits, one line
        names the need and ``remedy`` (e.g. ``--bounds``), before any cell is read.

        Returns
        -------
        (Dem, TiledPlan or None)
            The DEM, and the plan for :func:`divides.terrain.tiled_flow.tiled_routing`
            (None: route in memory).
        """
        import divides
        from divides.io.memory import BYTES_PER_CELL, MemoryNeed, fits
        from divides.terrain.tiled_flow import TiledPlan

        in_memory = BYTES_PER_CELL[task]
        by_tiles = BYTES_PER_CELL[f"{task}_tiled"] if self.conditioning == "fill" else in_memory
        if self.tiled:
            need = MemoryNeed(f"{task} (routing by tiles)", by_tiles, remedy)
        elif by_tiles < in_memory:
            need = MemoryNeed(f"{task} (even routing by tiles)", by_tiles, remedy)
        else:  # routing is not this task's peak: tiles would not help, the guard names the remedy
            need = MemoryNeed(task, in_memory, remedy)
        dem = divides.read_dem(read.path, **read.read_kwargs(), memory=need)
        cells = dem.shape[0] * dem.shape[1]
        auto = self.conditioning == "fill" and not fits(cells, in_memory)
        plan = (TiledPlan(scratch=self.scratch, workers=self.workers, scheduler=self.scheduler)
                if self.tiled or auto else None)
        return dem, plan


def tiled_options(tiled: bool = False, scratch: str | None = None, *, conditioning: str = "fill",
                  workers: int | None = None, scheduler: str | None = None) -> TiledOptions:
    """Check ``--tiled`` and ``--scratch`` before any work; ``workers``/``scheduler`` say where tiles run.

    Raises
    ------
    ParameterError
        ``--tiled`` with ``--conditioning breach`` (the tiled path fills only).
    OutputError
        The scratch folder is a file or cannot take new files.
    """
    if tiled and conditioning != "fill":
        raise ParameterError("--tiled conditions by filling only; drop --conditioning breach or --tiled")
    if scratch is not None:
        folder = Path(scratch).expanduser()
        if folder.exists() and not folder.is_dir():
            raise OutputError(f"--scratch '{scratch}' is a file; give a folder for the intermediate tiles")
        parent = folder if folder.exists() else next((q for q in folder.parents if q.exists()), Path("."))
        if not os.access(parent, os.W_OK | os.X_OK):
            raise OutputError(f"--scratch '{scratch}': cannot write in '{parent}'; give a writable folder")
        scratch = str(folder)
    return TiledOptions(tiled=tiled, scratch=scratch, conditioning=conditioning, workers=workers, scheduler=scheduler)


@contextlib.contextmanager
def quiet_warnings(quiet: bool) -> Iterator[None]:
    """Silence warnings inside the block when ``quiet`` (for ``--quiet``)."""
    with warnings.catch_warnings():
        if quiet:
            warnings.simplefilter("ignore")
        yield


def parse_theta(text: str) -> float | str:
    """Parse ``--theta VALUE|auto``: a concavity m/n in (0, 2], or ``"auto"``.

    Examples
    --------
    >>> parse_theta("0.45"), parse_theta("AUTO")
    (0.45, 'auto')
    """
    accepted = "'auto' or a concavity m/n above 0 and at most 2 (most rivers: 0.3 to 0.7)"
    if text.strip().lower() == "auto":
        return "auto"
    value = parse_number(text, option="--theta", accepted=accepted)
    if not 0 < value <= 2:
        raise ParameterError(f"--theta {text!r} is not accepted; give {accepted}")
    return value


def parse_bounded(
    text: str | None,
    *,
    option: str,
    unit: str,
    low: float,
    high: float,
    low_inclusive: bool = False,
    typical: str = "",
) -> float | None:
    """Parse an optional number that must lie in ``(low, high]`` (``[low, high]`` with ``low_inclusive``).

    Parameters
    ----------
    text : str or None
        The value as typed; None when the option was not given.
    option, unit : str
        For the message, e.g. ``"--dem-error"``, ``"m"``.
    low, high : float
        Accepted range.
    low_inclusive : bool
        Accept ``low`` itself.
    typical : str
        Typical values, appended to the message.

    Examples
    --------
    >>> parse_bounded("2.5", option="--dem-error", unit="m", low=0, high=100, low_inclusive=True)
    2.5
    """
    if text is None:
        return None
    above = f"{'at least' if low_inclusive else 'above'} {low:g}"
    accepted = f"a number of {unit} {above} and at most {high:g}" + (f" ({typical})" if typical else "")
    value = parse_number(text, option=option, accepted=accepted)
    if not ((value >= low if low_inclusive else value > low) and value <= high):
        raise ParameterError(f"{option} {text!r} is not accepted; give {accepted}")
    return value


def split_error(text: str | None, error_text: str | None, *, option: str, unit: str) -> tuple[str | None, float | None]:
    """Split ``VALUE±ERROR`` (or ``VALUE+-ERROR``) and check the error, given there or as ``{option}-error``.

    Parameters
    ----------
    text : str or None
        The value as typed, perhaps with its error.
    error_text : str or None
        The value of the separate ``{option}-error`` option.
    option, unit : str
        For the message.

    Returns
    -------
    (str or None, float or None)
        The value still to be checked, and its error (one standard deviation, finite, >= 0).

    Examples
    --------
    >>> split_error("0.2±0.05", None, option="--erosion-rate-a", unit="mm/yr")
    ('0.2', 0.05)
    >>> split_error("0.2+-0.05", None, option="--erosion-rate-a", unit="mm/yr")
    ('0.2', 0.05)
    """
    value, error = text, None
    if text is not None:
        for sign in ("±", "+-", "+/-"):
            if sign in text:
                value, error = (part.strip() for part in text.split(sign, 1))
                break
    if error is not None and error_text is not None:
        raise ParameterError(f"{option} {text!r} carries an error and {option}-error is given too; give the error once")
    error = error if error is not None else error_text
    if error is None:
        return value, None
    accepted = f"one standard deviation in {unit}, a finite number >= 0 (e.g. {option} 0.2±0.05)"
    number = parse_number(error, option=f"{option} error", accepted=accepted)
    if number < 0:
        raise ParameterError(f"{option} error {error!r} is not accepted; give {accepted}")
    if value is None:
        raise ParameterError(f"{option}-error is given without {option}; give the value too")
    return value, number


def parse_closed_edges(text: str | None) -> tuple[str, ...]:
    """Parse ``--closed-edges north,south`` into a tuple of edge names.

    Examples
    --------
    >>> parse_closed_edges("North, south")
    ('north', 'south')
    >>> parse_closed_edges(None)
    ()
    """
    if text is None:
        return ()
    accepted = f"one or more of {', '.join(EDGE_CHOICES)}, separated by commas (at most three)"
    names = [part.strip().lower() for part in text.split(",")]
    bad = [n for n in names if n not in EDGE_CHOICES]
    if bad or len(set(names)) != len(names) or len(names) > 3:
        raise ParameterError(f"--closed-edges {text!r} is not accepted; give {accepted}")
    return tuple(names)


def default_out_dir(dem_path: str, command: str, *, cwd: str | os.PathLike | None = None) -> Path:
    """The default ``--out`` of a command: ``divides-<DEM file name without suffix>-<command>``.

    Each command has its own default folder, so ``divides assess X`` then
    ``divides screen X`` do not collide.

    Examples
    --------
    >>> default_out_dir("/data/site 4/dem.tif", "assess", cwd="/tmp").as_posix()
    '/tmp/divides-dem-assess'
    """
    stem = Path(dem_path.rstrip("/")).stem or "dem"
    return Path(os.getcwd() if cwd is None else cwd) / f"divides-{stem}-{command}"


def _probe_writable(parent: Path) -> None:
    """Create and remove a hidden folder in ``parent``: the only sure test of writability.

    ``os.access`` says yes to root everywhere, including read-only and
    virtual file systems such as ``/proc``.
    """
    probe = parent / f".divides-probe-{os.getpid()}-{time.monotonic_ns()}"
    try:
        os.mkdir(probe)
    except OSError as exc:
        raise OutputError(f"cannot write outputs in '{parent}': it does not accept new folders "
                          f"({exc.strerror or exc}); choose another --out") from None
    try:
        os.rmdir(probe)
    except OSError:  # pragma: no cover - created a moment ago, so removable
        pass


def check_out_dir(out: str | os.PathLike, *, overwrite: bool) -> Path:
    """Refuse an output folder that cannot be used, before any work is done.

    The rules on an existing folder are the writer's
    (:func:`divides.report.writer.check_out_dir`); this adds that the nearest
    existing parent must be a writable folder, so that a run that could only
    fail at the end is refused at the start.

    Parameters
    ----------
    out : str or os.PathLike
        The ``--out`` folder.
    overwrite : bool
        ``--overwrite`` was given.

    Returns
    -------
    pathlib.Path
        The absolute output folder.

    Raises
    ------
    OutputError
        The folder exists (without ``--overwrite``), is a file, is not an
        earlier divides output, or its nearest existing parent is not a
        writable folder.
    """
    from divides.report.writer import check_out_dir as check_existing  # matplotlib: only once a command runs

    if not os.fspath(out).strip():
        raise OutputError("--out is empty; give a folder for the outputs")
    path = check_existing(out, overwrite=overwrite, cli=True)
    parent = path.parent
    while not parent.exists() and parent != parent.parent:
        parent = parent.parent
    if not parent.is_dir():
        raise OutputError(f"cannot write outputs to '{path}': '{parent}' is not a folder; choose another --out")
    _probe_writable(parent)
    return path


class Progress:
    """Stage lines on stderr: ``divides: [2/3] assessing the divide`` (nothing with ``quiet``).

    Plain text, no colour. Sub-steps (the files being written) go on one
    line redrawn in place when the stream is a terminal, one line each
    otherwise, so that logs stay readable.

    :meth:`hold` keeps lines back for a few seconds: a user error found
    early in the work (sides that overlap, found once flow is routed) then
    reaches the terminal as the only line, and :meth:`discard` drops what was
    held. Held lines are printed when :meth:`release` is called or the time
    is up, whichever comes first, so a long run still shows its progress.

    Parameters
    ----------
    total : int
        Number of stages.
    quiet : bool
        Print nothing.
    stream : file, optional
        Where to print; ``sys.stderr`` by default (looked up when printing).
    """

    def __init__(self, total: int, *, quiet: bool = False, stream: TextIO | None = None) -> None:
        self.total, self.quiet, self._stream, self.done = total, quiet, stream, 0
        self._start = time.perf_counter()
        self._redraw = False
        self._held: list[str] | None = None
        self._timer: threading.Timer | None = None
        self._lock = threading.Lock()

    @property
    def stream(self) -> TextIO:
        """The output stream."""
        return self._stream if self._stream is not None else sys.stderr

    def _tty(self) -> bool:
        try:
            return bool(self.stream.isatty())
        except (AttributeError, ValueError):
            return False

    def _write(self, text: str) -> None:
        with self._lock:
            if self._held is not None:
                self._held.append(text)
                return
            self.stream.write(text)
            self.stream.flush()

    def hold(self, seconds: float) -> None:
        """Keep lines back until :meth:`release`, :meth:`discard`, or ``seconds`` from now."""
        with self._lock:
            if self._held is None:
                self._held = []
            self._timer = threading.Timer(seconds, self.release)
            self._timer.daemon = True
            self._timer.start()

    def release(self) -> None:
        """Print the lines held back, and stop holding."""
        with self._lock:
            if self._timer is not None:
                self._timer.cancel()
                self._timer = None
            held, self._held = self._held, None
            if held:
                self.stream.write("".join(held))
                self.stream.flush()

    def discard(self) -> None:
        """Drop the lines held back (a user error follows alone), and stop holding."""
        with self._lock:
            if self._timer is not None:
                self._timer.cancel()
                self._timer = None
            self._held = None

    @contextlib.contextmanager
    def held(self, seconds: float) -> Iterator[None]:
        """Hold lines back during the block (see :meth:`hold`); drop them if it ends in a user error."""
        self.hold(seconds)
        try:
            yield
        except DividesError:
            self.discard()
            raise
        finally:
            self.release()

    def _end_redraw(self) -> None:
        if self._redraw:
            self._write("\n")
            self._redraw = False

    def stage(self, text: str) -> None:
        """Announce the next stage."""
        self.done += 1
        if self.quiet:
            return
        self._end_redraw()
        elapsed = time.perf_counter() - self._start
        self._write(f"divides: [{self.done}/{self.total}] {text} (at {elapsed:.1f} s)\n")

    def step(self, text: str, index: int | None = None, count: int | None = None) -> None:
        """Show a sub-step of the current stage, with a bar when ``index`` and ``count`` are known."""
        if self.quiet:
            return
        bar = ""
        if index is not None and count:
            filled = int(round(20 * min(index, count) / count))
            bar = f"[{'#' * filled}{'.' * (20 - filled)}] {index}/{count} "
        if self._tty():
            self._write(f"\r  {bar}{text}".ljust(79)[:79])
            self._redraw = True
        else:
            self._write(f"  {bar}{text}\n")

    def announce_cold_kernels(self) -> None:
        """On a cold kernel cache, show the compile wait at once (held lines first)."""
        if kernels_cold():
            self.release()  # a wait the user should hear about at once
            self.step(KERNELS_COLD_MESSAGE)

    def finish(self) -> None:
        """End a redrawn line, if any."""
        if not self.quiet:
            self._end_redraw()


#: Shown before routing on a cold cache of compiled kernels.
KERNELS_COLD_MESSAGE = "compiling fast kernels (first run only, ~15 s)"

#: Kernel modules every assessment and screening compiles (the ones a first run waits for).
_KERNEL_MODULES = (("terrain", "_fill_kernels"), ("terrain", "_routing_kernels"), ("terrain", "_channel_kernels"),
                   ("profiles", "_profile_kernels"))


def kernels_cold(package_dir: str | os.PathLike | None = None) -> bool:
    """True when numba has no cached machine code for the kernels yet (the first run after installing).

    Looks for numba's cache index files (``<module>.<function>-<line>.pyXY.nbi``)
    where numba keeps them: under ``NUMBA_CACHE_DIR`` when it is set, else
    beside each kernel module (or, for a read-only install, in the user's
    cache folder). numba itself is not imported; a wrong answer costs only a message.
    """
    if package_dir is None:
        import divides

        package_dir = Path(divides.__file__).resolve().parent
    tag = f"py{sys.version_info.major}{sys.version_info.minor}"
    chosen = os.environ.get("NUMBA_CACHE_DIR")
    user_wide = Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache") / "numba"
    for room, module in _KERNEL_MODULES:
        pattern = f"{module}.*.{tag}.nbi"
        if chosen:
            found = Path(chosen).is_dir() and any(Path(chosen).rglob(pattern))
        else:
            found = any((Path(package_dir) / room / "__pycache__").glob(pattern)) or (
                user_wide.is_dir() and any(user_wide.rglob(pattern)))
        if not found:
            return True
    return False
