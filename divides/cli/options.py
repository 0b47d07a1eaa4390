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
import warnings
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Annotated, Any

import typer

from divides.errors import DemReadError, ParameterError

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
    "RouteOptions",
    "check_dem_path",
    "parse_number",
    "parse_bounds",
    "parse_cell_size",
    "parse_choice",
    "dem_options",
    "route_options",
    "quiet_warnings",
]

#: Accepted ``--vertical-unit`` values; ``divides.io.reading.VERTICAL_UNITS``
#: holds their sizes (repeated here so that ``--help`` need not import rasterio).
VERTICAL_UNIT_CHOICES: tuple[str, ...] = ("m", "ft", "us-ft")

#: Accepted ``--conditioning`` values (``divides.terrain.conditioning.CONDITIONING_METHODS``).
CONDITIONING_CHOICES: tuple[str, ...] = ("fill", "breach")

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
    typer.Option("--quiet", "-q", help="Print no warnings on stderr (errors are still printed)."),
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


# ---------------------------------------------------------------- parsing
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

    def route_kwargs(self) -> dict[str, Any]:
        """Keyword arguments of :func:`divides.route` (the DEM excluded)."""
        return {"conditioning": self.conditioning, "sea_level": self.sea_level}


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


def route_options(*, conditioning: str = "fill", sea_level: str | None = None) -> RouteOptions:
    """Check the routing options as typed.

    Raises
    ------
    ParameterError
        Unknown conditioning method or a sea level that is not a finite number.
    """
    return RouteOptions(
        conditioning=parse_choice(conditioning, option="--conditioning", choices=CONDITIONING_CHOICES),
        sea_level=None
        if sea_level is None
        else parse_number(sea_level, option="--sea-level", accepted="an elevation in metres"),
    )


@contextlib.contextmanager
def quiet_warnings(quiet: bool) -> Iterator[None]:
    """Silence warnings inside the block when ``quiet`` (for ``--quiet``)."""
    with warnings.catch_warnings():
        if quiet:
            warnings.simplefilter("ignore")
        yield
