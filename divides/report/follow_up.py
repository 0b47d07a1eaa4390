"""The ``divides assess`` command that follows up a screened divide segment.

A screening ranks where to look; the next step is an assessment of the divide the segment
lies on. Its sides are the rivers (outlet basins) on either side of the stretch of divide
the segment was judged on (its own pair of basins and those it was pooled with), each given
by the point at its mouth (the one cell every other cell of it drains through,
:func:`divides.terrain.basins.basin_mouths`), or, where the screening labelled the regions
of the DEM's edges, the edge's name. A tributary basin's own divide with its neighbour is
often a kilometre or two, too short to hold the independent samples an assessment needs;
the rivers' divide holds the stretch the screening judged. The command repeats the options
the screening read the DEM and judged the divides with, so that both look at the same
surface, channels and concavity, and snaps the points no further than half a cell, so each
stays on its mouth.
"""

from __future__ import annotations

import shlex
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from divides.config import AssessConfig
from divides.terrain.basins import EDGE_LABELS, basin_mouths, outlets_of

if TYPE_CHECKING:
    from divides.assess.screen import Screening

__all__ = ["basin_sides", "assess_command", "follow_up_segments", "stretch_sides", "FOLLOW_UP_ROWS"]

#: Segments given a follow-up command in the report: those with a direction first, then by rank.
FOLLOW_UP_ROWS = 5

#: Options of ``divides screen`` that ``divides assess`` takes alike: how the DEM is read, and the rasters
#: that weight χ (taken from the screening's command line as typed; flags take no value).
_READ_OPTIONS = ("--band", "--bounds", "--vertical-unit", "--cell-size", "--runoff-raster", "--erodibility-raster",
                 "--uplift-raster")
_READ_FLAGS = ("--tiled",)


def basin_sides(result: Screening) -> dict[int, str]:
    """The side SPEC of every basin of a screening, as ``divides assess --side-a`` takes it.

    Parameters
    ----------
    result : Screening

    Returns
    -------
    dict
        Label -> ``"x,y"`` of the mouth of the river (outlet basin) the basin belongs to, in the
        DEM's CRS (to 1e-7 of a degree on a geographic DEM, about 1 cm, else to 0.01 of the CRS
        unit), or the edge's name at ``level="edges"``.
    """
    level = result.parameters.get("level")
    mouths = basin_mouths(result.flow, result.labels)  # one pass over the grid, no sort of it
    if level == "edges":
        return {k: edge for edge, k in EDGE_LABELS.items() if k < mouths.size and mouths[k] >= 0}
    if level == "tributaries":  # a tributary basin's river is the outlet basin its mouth drains to
        found = mouths >= 0
        mouths[found] = outlets_of(result.flow, mouths[found])
    digits = 7 if result.dem.geographic else 2
    cols = result.dem.shape[1]
    sides = {}
    for label in np.flatnonzero(mouths >= 0):
        row, col = divmod(int(mouths[label]), cols)
        x, y = result.dem.xy(row, col)
        sides[int(label)] = f"{round(float(x), digits):.{digits}f},{round(float(y), digits):.{digits}f}"
    return sides


def _typed(command: Sequence[str] | None) -> list[str]:
    """The reading options of the screening's command line (after the program name), as typed."""
    words = list(command or [])
    out: list[str] = []
    i = 0
    while i < len(words):
        word = words[i]
        name = word.split("=", 1)[0]
        if name in _READ_FLAGS:
            out.append(word)
        elif name in _READ_OPTIONS:
            if "=" in word:
                out.append(word)
            elif i + 1 < len(words):
                out += [word, words[i + 1]]
                i += 1
        i += 1
    return out


def assess_command(result: Screening, segment: dict, sides: dict[int, str], *, dem_file: str | None,
                   command: Sequence[str] | None = None) -> str:
    """The ``divides assess`` command line for one screened segment's divide.

    Parameters
    ----------
    result : Screening
    segment : dict
        One of ``result.segments``.
    sides : dict
        :func:`basin_sides` of ``result``.
    dem_file : str or None
        The DEM's file name (``DEM.tif`` when it was built in memory).
    command : sequence of str, optional
        The screening's command line (provenance ``command``), for its reading options.

    Returns
    -------
    str
        A shell-quoted command: side a holds the segment's lower label, as in its verdict; each
        side is named after the segment's basin on it (``river of B7``, or ``3 rivers on the side
        of B7`` for a stretch; ``B7`` when the labels are the rivers or the edges).

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> fake = SimpleNamespace(parameters={"theta": 0.45, "channel_area_used_m2": 1e6, "dem_error_m": 1.0,
    ...                                    "closed_edges": [], "conditioning": "fill", "level": "tributaries"},
    ...                        dem=SimpleNamespace(dx=np.array([30.0]), dy=np.array([30.0])))
    >>> print(assess_command(fake, {"basins": [37, 49]}, {37: "1.00,2.00", 49: "3.00,4.00"}, dem_file="my dem.tif",
    ...                      command=["divides", "screen", "my dem.tif", "--bounds", "0,0,9,9", "--out", "s"]))
    ... # doctest: +NORMALIZE_WHITESPACE
    divides assess 'my dem.tif' --side-a 1.00,2.00 --side-b 3.00,4.00 --name-a 'river of B37'
    --name-b 'river of B49' --theta 0.45 --snap-radius 15 --channel-area 1e+06 --bounds 0,0,9,9
    """
    a, b = (int(v) for v in segment["basins"])
    p: dict[str, Any] = result.parameters
    side_a, side_b = (sides[a], sides[b]) if p.get("level") == "edges" else stretch_sides(segment, sides)
    name_a, name_b = (_side_name(label, spec, p.get("level")) for label, spec in ((a, side_a), (b, side_b)))
    words = ["divides", "assess", dem_file or "DEM.tif", "--side-a", side_a, "--side-b", side_b,
             "--name-a", name_a, "--name-b", name_b, "--theta", f"{p['theta']:g}"]
    if p.get("level") != "edges":  # each point is a mouth: no snapping onto a larger channel nearby
        words += ["--snap-radius", f"{0.5 * _smallest_cell_m(result):.3g}"]
    if p.get("channel_area_used_m2"):  # the screening's own pick, which an assessment would otherwise redo
        words += ["--channel-area", f"{p['channel_area_used_m2']:.4g}"]
    defaults = AssessConfig()
    if p.get("n") is not None and p["n"] != defaults.n:
        words += ["--n", f"{p['n']:g}"]
    if p.get("dem_error_m") is not None and p["dem_error_m"] != defaults.dem_error_m:
        words += ["--dem-error", f"{p['dem_error_m']:g}"]
    if p.get("dem_error_length_m") is not None:
        words += ["--dem-error-length", f"{p['dem_error_length_m']:g}"]
    if p.get("closed_edges"):
        words += ["--closed-edges", ",".join(p["closed_edges"])]
    if p.get("sea_level_m") is not None:
        words += ["--sea-level", f"{p['sea_level_m']:g}"]
    if p.get("conditioning") not in (None, "fill"):
        words += ["--conditioning", str(p["conditioning"])]
    if p.get("voids") not in (None, "fill"):
        words += ["--voids", str(p["voids"])]
    return shlex.join(words + _typed(command))


def stretch_sides(segment: dict, sides: dict[int, str]) -> tuple[str, str]:
    """Side SPECs a and b of the stretch of divide a segment was judged on.

    A short segment is judged with the segments continuing it (``judged_pairs``, each pair
    oriented as the segment's); each side is then every river (mouth) those pairs hold on it,
    joined with ``;``, so that the assessment reads the stretch the screening judged. A river
    that lies on both sides (a divide that winds round it) is left to the segment's own pair.

    Examples
    --------
    >>> stretch_sides({"basins": [3, 8], "judged_pairs": [(3, 8), (5, 8), (5, 9)]},
    ...               {3: "1,1", 5: "2,2", 8: "7,7", 9: "7,7"})
    ('1,1;2,2', '7,7')
    """
    a, b = (int(v) for v in segment["basins"])
    pairs = segment.get("judged_pairs") or [(a, b)]
    on_a = list(dict.fromkeys(sides[int(x)] for x, _ in pairs if int(x) in sides))
    on_b = list(dict.fromkeys(sides[int(y)] for _, y in pairs if int(y) in sides))
    if set(on_a) & set(on_b) or not on_a or not on_b:
        return sides[a], sides[b]
    return ";".join(on_a), ";".join(on_b)


def _side_name(label: int, spec: str, level: str | None) -> str:
    """The name of a side in the follow-up: the river of a tributary basin, or the rivers along the stretch."""
    rivers = spec.count(";") + 1
    if rivers > 1:
        return f"{rivers} rivers on the side of B{label}"
    return f"river of B{label}" if level == "tributaries" else f"B{label}"


def _smallest_cell_m(result: Screening) -> float:
    """The DEM's smallest cell side in metres (cells narrow toward the poles on a geographic DEM)."""
    return float(min(np.min(result.dem.dx), np.min(result.dem.dy)))


def follow_up_segments(segments: Sequence[dict], limit: int = FOLLOW_UP_ROWS) -> list[dict]:
    """The segments worth an assessment first: those the decision gives a direction, in rank order, then
    the rest by rank, at most ``limit``.

    Examples
    --------
    >>> [s["rank"] for s in follow_up_segments([{"rank": 1, "moves_toward_basin": None},
    ...                                         {"rank": 2, "moves_toward_basin": 7}], limit=2)]
    [2, 1]
    """
    directed = [s for s in segments if s.get("moves_toward_basin") is not None]
    return (directed + [s for s in segments if s.get("moves_toward_basin") is None])[:limit]
