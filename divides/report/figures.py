"""Figures of an assessment (matplotlib, Agg canvas, no display needed).

Every figure is drawn on its own :class:`matplotlib.figure.Figure` with an
Agg canvas, so nothing touches pyplot's global state and no display is
needed. Rasters are decimated to at most :data:`MAX_DISPLAY_PX` per side
before drawing, which keeps all figures of a 2000² DEM within seconds.

Colours: Okabe & Ito's colour-blind-safe set for the two sides (blue for a,
orange for b, which also differ in lightness), and cividis (Nuñez et al.
2018: lightness rising monotonically, so readable in greyscale and by
colour-blind readers) for χ and for the local evidence of motion (dark blue:
into a, yellow: into b). Every map carries a scale bar, a north arrow (true
north, from the CRS) and the CRS name with its EPSG code; figures are
written as 200 dpi PNG and as SVG.
"""

from __future__ import annotations

import io
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
from matplotlib import colormaps, patheffects
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.collections import LineCollection
from matplotlib.colors import LightSource, ListedColormap, to_rgb
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from divides.assess.points import METRICS
from divides.report.layers import motion_index
from divides.report.text import side_label

if TYPE_CHECKING:  # pragma: no cover - imports for type hints only
    from divides.assess.assessment import Assessment
    from divides.io.dem import Dem

__all__ = [
    "FIGURES",
    "CAPTIONS",
    "SIDE_COLOURS",
    "FILLED_HATCH",
    "filled_voids",
    "MAX_DISPLAY_PX",
    "render_figures",
    "to_png",
    "to_svg",
    "map_furniture",
    "crs_label",
    "true_north",
    "MOTION_CMAP",
    "map_figure",
    "chi_map_figure",
    "chi_elevation_figure",
    "contrast_figure",
    "contrast_orientation",
    "profile_figure",
    "slope_area_figure",
]

#: Okabe & Ito (2008) blue for side a and orange for side b.
SIDE_COLOURS = {"a": "#0072B2", "b": "#E69F00"}

#: Largest raster side drawn, in cells (larger rasters are decimated for display).
MAX_DISPLAY_PX = 800

#: Most knickpoints drawn on one map or χ plot (all are in the tables and layers).
MAX_KNICKPOINTS = 100

#: Resolution of the PNGs (dots per inch): print quality for a report.
DPI = 200

#: Figure file stem -> name of the function in this module that draws it.
FIGURES = {
    "map": "map_figure",
    "chi_map": "chi_map_figure",
    "chi_elevation": "chi_elevation_figure",
    "contrasts": "contrast_figure",
    "long_profiles": "profile_figure",
    "slope_area": "slope_area_figure",
}

#: One-sentence captions for the report.
CAPTIONS = {
    "map": "The two sides on a shaded relief, the divide coloured by the local evidence of motion "
           "(cividis: dark blue into side a, yellow into side b; grey where no measure is available), arrows in the direction of the verdict, significant "
           "knickpoints and the first-order equilibrium divide.",
    "chi_map": "χ of the analysed channels, integrated from the common base level of both sides. "
               "The divide tends to move toward the side whose channel heads have the higher χ.",
    "chi_elevation": "Elevation against χ (from the common base level) for every analysed channel, by side. "
                     "With uniform uplift and erodibility, straight profiles suggest steady state and breaks mark "
                     "knickpoints; the side whose heads reach higher χ at a similar elevation loses ground in the "
                     "long run. Knickpoints below the common base level have no χ from it: the legend counts "
                     "them, and they are drawn on the map and the long profiles.",
    "contrasts": "Across-divide differences with 95 % block-bootstrap intervals, every panel the same way "
                 "round: left (blue) the divide moves into side a, right (orange) into side b. Each panel's axis "
                 "says which difference it shows (a − b or b − a). A filled marker counts as evidence.",
    "long_profiles": "Long profiles of the longest channels of each side and of every channel with a "
                     "significant knickpoint, from the channel head down to the network's own outlet (below the "
                     "common base level too), side a to the left and side b to the right of their channel heads.",
    "slope_area": "Channel gradient against drainage area for both sides, with binned medians and the "
                  "power law fitted to all analysed channels.",
}

_HALO = [patheffects.withStroke(linewidth=3.0, foreground="white")]

#: Colour map of the local evidence of motion: cividis, dark blue "into a" to yellow "into b".
#: Its lightness rises monotonically, so the sense survives greyscale printing and colour blindness.
MOTION_CMAP = "cividis"


# ------------------------------------------------------------------ helpers
def to_png(fig: Figure) -> bytes:
    """Render a figure to PNG bytes with the Agg canvas."""
    if not isinstance(fig.canvas, FigureCanvasAgg):
        FigureCanvasAgg(fig)
    buf = io.BytesIO()
    # a tight box keeps titles and legends whole whatever the map's shape
    fig.savefig(buf, format="png", dpi=fig.dpi, bbox_inches="tight", pad_inches=0.08)
    return buf.getvalue()


def to_svg(fig: Figure) -> bytes:
    """Render a figure to SVG bytes (vector lines and text, rasters embedded), for reports."""
    buf = io.BytesIO()
    fig.savefig(buf, format="svg", bbox_inches="tight", pad_inches=0.08, metadata={"Date": None})
    return buf.getvalue()


def render_figures(
    result: Assessment,
    *,
    progress: Callable[[str], None] | None = None,
    vectors: dict[str, bytes] | None = None,
) -> dict[str, bytes]:
    """Draw every figure of :data:`FIGURES` and return name -> PNG bytes.

    ``progress(stage)`` is called before each figure with ``"figure: NAME"``.
    With ``vectors`` (a dict), each figure's SVG is stored there under its
    name too. Functions are looked up by name at call time, so each can be
    replaced (tests do so to inject failures).
    """
    out = {}
    for name, function in FIGURES.items():
        if progress is not None:
            progress(f"figure: {name}")
        fig = globals()[function](result)
        out[name] = to_png(fig)
        if vectors is not None:
            vectors[name] = to_svg(fig)
    return out


def _figure(width: float, height: float) -> Figure:
    fig = Figure(figsize=(width, height), dpi=DPI, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


@dataclass(frozen=True)
class _Frame:
    """How DEM coordinates are shown on map axes."""

    scale: float  # CRS units -> axis units
    xlabel: str
    ylabel: str
    aspect: float
    geographic: bool


def _frame(dem: Dem) -> _Frame:
    if dem.crs is not None and dem.geographic:
        mid = 0.5 * (dem.bounds[1] + dem.bounds[3])
        return _Frame(1.0, "Longitude (°)", "Latitude (°)", 1.0 / max(np.cos(np.radians(mid)), 1e-6), True)
    factor = 1.0
    if dem.crs is not None:
        factor = float(dem.crs.linear_units_factor[1] or 1.0)
    if dem.crs is None:
        return _Frame(factor / 1000.0, "x (km)", "y (km)", 1.0, False)
    return _Frame(factor / 1000.0, "Easting (km)", "Northing (km)", 1.0, False)


def _extent(dem: Dem, frame: _Frame) -> list[float]:
    left, bottom, right, top = dem.bounds
    return [left * frame.scale, right * frame.scale, bottom * frame.scale, top * frame.scale]


def _stride(shape: tuple[int, int]) -> int:
    return max(1, int(np.ceil(max(shape) / MAX_DISPLAY_PX)))


def _decimate(array: np.ndarray, step: int) -> np.ndarray:
    return array[::step, ::step]


def _display_extent(dem: Dem, frame: _Frame, step: int) -> list[float]:
    """Extent of a decimated raster: the cells kept cover ``step`` source cells each."""
    rows, cols = dem.shape
    t = dem.transform
    right = t.c + t.a * (int(np.ceil(cols / step)) * step)
    bottom = t.f + t.e * (int(np.ceil(rows / step)) * step)
    return [t.c * frame.scale, right * frame.scale, bottom * frame.scale, t.f * frame.scale]


def _hillshade(ax, dem: Dem, frame: _Frame) -> None:
    """Grey shaded relief (light from the north-west, 45° high; common practice)."""
    step = _stride(dem.shape)
    z = _decimate(dem.elevation, step).astype(np.float64)
    valid = np.isfinite(z)
    if not valid.any():
        return
    z = np.where(valid, z, np.nanmean(z))
    dx = float(np.median(dem.dx)) * step
    dy = float(np.median(dem.dy)) * step
    shade = LightSource(azdeg=315, altdeg=45).hillshade(z, vert_exag=1.0, dx=dx, dy=dy)
    shade = np.ma.masked_array(0.35 + 0.65 * shade, ~valid)
    ax.imshow(shade, cmap="gray", vmin=0, vmax=1, extent=_display_extent(dem, frame, step),
              interpolation="bilinear", origin="upper", zorder=0,
              aspect=frame.aspect)  # imshow would reset the aspect to 1


#: Hatch of the cells filled by interpolation on the maps (a pattern, not a colour: the maps' colours all mean
#: something else).
FILLED_HATCH = "xxxx"


def filled_voids(ax, dem: Dem, frame: _Frame, voids) -> list:
    """Hatch and outline the cells filled by interpolation (``voids``: a :class:`divides.terrain.voids.VoidFill`);
    the legend handle, or none when nothing was filled. A display cell is marked when any cell of its block was
    filled, so a small hole stays visible on a large DEM."""
    filled = voids.filled
    if filled is None or not filled.any():
        return []
    step = _stride(dem.shape)
    if step > 1:
        rows, cols = filled.shape
        pad = np.pad(filled, ((0, -rows % step), (0, -cols % step)))
        filled = pad.reshape(pad.shape[0] // step, step, pad.shape[1] // step, step).any(axis=(1, 3))
    left, right, bottom, top = _display_extent(dem, frame, step)
    n_rows, n_cols = filled.shape
    # cell centres of the grid padded by one empty cell all round, so every outline closes
    xs = left + (right - left) / n_cols * (np.arange(n_cols + 2) - 0.5)
    ys = top + (bottom - top) / n_rows * (np.arange(n_rows + 2) - 0.5)
    grid = np.pad(filled.astype(float), 1)
    ax.contourf(xs, ys, grid, levels=[0.5, 1.5], colors="none", hatches=[FILLED_HATCH], zorder=1.5)
    ax.contour(xs, ys, grid, levels=[0.5], colors="0.15", linewidths=0.8, zorder=1.6)
    return [Patch(facecolor="none", edgecolor="0.15", hatch=FILLED_HATCH, lw=0.8,
                  label="nodata filled by interpolation")]


def _side_tint(ax, result: Assessment, frame: _Frame, alpha: float = 0.22) -> None:
    dem = result.dem
    step = _stride(dem.shape)
    labels = np.zeros(dem.shape, dtype=np.uint8)
    labels[result.sides.a.mask] = 1
    labels[result.sides.b.mask] = 2
    small = _decimate(labels, step)
    cmap = ListedColormap([(0, 0, 0, 0), (*to_rgb(SIDE_COLOURS["a"]), alpha), (*to_rgb(SIDE_COLOURS["b"]), alpha)])
    ax.imshow(small, cmap=cmap, vmin=-0.5, vmax=2.5, extent=_display_extent(dem, frame, step),
              interpolation="nearest", origin="upper", zorder=1,
              aspect=frame.aspect)


def _channel_segments(result: Assessment, frame: _Frame) -> tuple[np.ndarray, np.ndarray]:
    """Segments (cell to downstream cell) of the analysed channels, in axis units, and their positions."""
    channels = result.channels
    kept = np.flatnonzero(result.profiles.side > 0)
    down = channels.down[kept]
    kept = kept[down >= 0]
    down = channels.down[kept]
    rows, cols = np.divmod(channels.cells, result.dem.shape[1])
    x, y = result.dem.xy(rows, cols)
    x, y = x * frame.scale, y * frame.scale
    seg = np.stack([np.column_stack([x[kept], y[kept]]), np.column_stack([x[down], y[down]])], axis=1)
    return seg, kept


def _channel_widths(area: np.ndarray) -> np.ndarray:
    """Line widths growing with log drainage area, 0.4 to 2.2 points."""
    la = np.log10(np.maximum(area, 1.0))
    lo, hi = float(la.min()), float(la.max())
    return 0.4 + 1.8 * (la - lo) / (hi - lo) if hi > lo else np.full(area.shape, 1.0)


def _divide_lines(ax, result: Assessment, frame: _Frame, **kwargs) -> None:
    for line in result.divide.lines:
        ax.plot(line.x * frame.scale, line.y * frame.scale, **kwargs)


def crs_label(dem: Dem) -> str:
    """The CRS in words with its EPSG code, e.g. ``"WGS 84 / UTM zone 30N (EPSG:32630)"``."""
    if dem.crs is None:
        return "no CRS: local grid in metres"
    try:
        import pyproj

        crs = pyproj.CRS.from_user_input(dem.crs.to_wkt())
        name, epsg = crs.name, crs.to_epsg()
    except Exception:  # noqa: BLE001 - a CRS pyproj cannot name still gets rasterio's words
        name, epsg = dem.crs.to_string(), dem.crs.to_epsg()
    return f"{name} (EPSG:{epsg})" if epsg else f"{name} (no EPSG code)"


def true_north(dem: Dem) -> tuple[float, bool]:
    """Angle of true north on the map at its centre (degrees clockwise from up) and whether it is true north.

    Found by stepping 0.01° north in latitude from the centre and projecting
    back; grid north (0°, False) on grids without a CRS.
    """
    if dem.crs is None:
        return 0.0, False
    if dem.geographic:
        return 0.0, True
    left, bottom, right, top = dem.bounds
    x0, y0 = 0.5 * (left + right), 0.5 * (bottom + top)
    try:
        lon, lat = dem.to_lonlat(np.array([x0]), np.array([y0]))
        step = -0.01 if float(lat[0]) > 89.0 else 0.01
        x1, y1 = dem.from_lonlat(np.asarray(lon, dtype=np.float64), np.asarray(lat, dtype=np.float64) + step)
        dx, dy = float(x1[0] - x0) * np.sign(step), float(y1[0] - y0) * np.sign(step)
    except Exception:  # noqa: BLE001 - no transformation to lon/lat: grid north it is
        return 0.0, False
    if not (np.isfinite(dx) and np.isfinite(dy)) or dx == dy == 0:
        return 0.0, False
    return float(np.degrees(np.arctan2(dx, dy))), True


def _nice_length(target_m: float) -> float:
    """The largest 1, 2 or 5 × 10^k metres not above ``target_m``."""
    power = 10.0 ** np.floor(np.log10(max(target_m, 1e-9)))
    for step in (5.0, 2.0, 1.0):
        if step * power <= target_m:
            return float(step * power)
    return float(power)


def _scale_bar(ax, dem: Dem, frame: _Frame) -> None:
    from mpl_toolkits.axes_grid1.anchored_artists import AnchoredSizeBar

    left, bottom, right, top = dem.bounds
    mid = np.array([0.5 * (bottom + top)])
    if frame.geographic:
        per_e = float(_metres_to_axis(dem, frame, mid)[0][0])
    else:
        factor = float(dem.crs.linear_units_factor[1] or 1.0) if dem.crs is not None else 1.0
        per_e = frame.scale / factor  # axis units per metre
    width_m = (right - left) * frame.scale / per_e
    length = _nice_length(0.22 * width_m)
    label = f"{length / 1000:g} km" if length >= 1000 else f"{length:g} m"
    bar = AnchoredSizeBar(ax.transData, length * per_e, label, "lower left", pad=0.4, borderpad=0.5, sep=3,
                          frameon=True, size_vertical=0, color="black", fontproperties={"size": 8})
    bar.patch.set(alpha=0.85, facecolor="white", edgecolor="0.6", linewidth=0.5)
    bar.set_zorder(9)
    ax.add_artist(bar)


#: How much narrower than its figure a map's axes are (inches): the axis labels and the colour bar beside it.
_MAP_SIDE_IN = 2.2


def _map_height_in(fig: Figure, dem: Dem, frame: _Frame) -> float:
    """About the height (inches) of a map's data area: the width :func:`_map_size` leaves beside it times the DEM's
    aspect, or less where the figure's height caps the map (the height less the room of the largest ``extra``, 2 in)."""
    width = max(fig.get_figwidth() - _MAP_SIDE_IN, 0.5)
    return min(width * _map_ratio(dem, frame), max(fig.get_figheight() - 2.0, 0.5))


def _north_arrow(fig: Figure, ax, dem: Dem, frame: _Frame) -> None:
    from matplotlib.transforms import ScaledTranslation

    angle, true = true_north(dem)
    # the map's vertical axis is stretched by frame.aspect: turn the ground direction into a screen one
    rad = np.radians(angle)
    ux, uy = np.sin(rad), np.cos(rad) * frame.aspect
    norm = float(np.hypot(ux, uy)) or 1.0
    ux, uy = ux / norm, uy / norm
    text = "N" if true else "N (grid)"
    size = 9.0  # points
    # placed from the map's top right corner in inches, its length a share of the map's height, so that on a
    # short map (a strip of DEM) the arrow and its letter stay inside the map, clear of the title
    length = min(0.42, 0.15 * _map_height_in(fig, dem, frame))  # inches
    half = 0.5 * len(text) * 0.6 * size / 72.0  # the letter's half-width, a character 0.6 em wide
    corner, x0, y0 = (1.0, 1.0), -(0.08 + max(half, 0.1)), -0.14  # the letter's centre from the corner

    def at(back: float):  # ``back`` inches from the letter, against the arrow's direction
        return ax.transAxes + ScaledTranslation(x0 - back * ux, y0 - back * uy, fig.dpi_scale_trans)

    label, tip, base = at(0.0), at(0.13), at(0.13 + length)
    ax.annotate("", xy=corner, xycoords=tip, xytext=corner, textcoords=base, zorder=9, gid="north-arrow",
                arrowprops=dict(arrowstyle="-|>,head_width=0.35,head_length=0.7", color="black", lw=1.6,
                                shrinkA=0, shrinkB=0, path_effects=_HALO))
    ax.text(*corner, text, transform=label, ha="center", va="center", fontsize=size,
            fontweight="bold", zorder=9, path_effects=_HALO)


def map_furniture(fig: Figure, ax, dem: Dem, frame: _Frame) -> None:
    """Scale bar, north arrow and the CRS (name and EPSG code) on a map."""
    _scale_bar(ax, dem, frame)
    _north_arrow(fig, ax, dem, frame)
    ax.set_xlabel(f"{frame.xlabel}\n{crs_label(dem)}")


def _map_base(result: Assessment, *, extra: float, tint: float):
    """A map figure with shaded relief and tinted sides; also the analysed channel segments to draw."""
    frame = _frame(result.dem)
    fig = _figure(*_map_size(result.dem, frame, extra=extra))
    ax = _map_axes(fig, result, frame)
    map_furniture(fig, ax, result.dem, frame)
    _hillshade(ax, result.dem, frame)
    _side_tint(ax, result, frame, alpha=tint)
    seg, pos = _channel_segments(result, frame)
    return fig, ax, frame, seg, pos


def _map_axes(fig: Figure, result: Assessment, frame: _Frame):
    ax = fig.add_subplot()
    ax.set_xlabel(frame.xlabel)
    ax.set_ylabel(frame.ylabel)
    ax.set_aspect(frame.aspect)
    ext = _extent(result.dem, frame)
    ax.set_xlim(ext[0], ext[1])
    ax.set_ylim(ext[2], ext[3])
    ax.ticklabel_format(useOffset=False, style="plain")
    return ax


def _map_size(dem: Dem, frame: _Frame, *, width: float = 8.0, extra: float = 1.6) -> tuple[float, float]:
    """Figure size whose height fits the map: axes :data:`_MAP_SIDE_IN` narrower than the figure, plus ``extra``."""
    return width, float(np.clip((width - _MAP_SIDE_IN) * _map_ratio(dem, frame) + extra, 4.0, 11.0))


def _map_ratio(dem: Dem, frame: _Frame) -> float:
    """The map's height over its width as drawn (the DEM's extent, its vertical axis stretched by ``frame.aspect``)."""
    left, bottom, right, top = dem.bounds
    return (top - bottom) * frame.aspect / max(right - left, 1e-12)


def _metres_to_axis(dem: Dem, frame: _Frame, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Axis units per metre east and north at CRS northings/latitudes ``y``."""
    if frame.geographic:
        lat = np.radians(np.asarray(y, dtype=np.float64))
        # lengths of a degree on the WGS 84 ellipsoid (series; common practice)
        per_deg_lat = 111132.92 - 559.82 * np.cos(2 * lat) + 1.175 * np.cos(4 * lat)
        per_deg_lon = 111412.84 * np.cos(lat) - 93.5 * np.cos(3 * lat)
        return 1.0 / np.maximum(per_deg_lon, 1e-6), 1.0 / per_deg_lat
    one = np.ones_like(np.asarray(y, dtype=np.float64)) * frame.scale
    return one, one


def _shown_knickpoints(result: Assessment, limit: int = MAX_KNICKPOINTS) -> tuple[list[dict], str]:
    """The knickpoints worth drawing and their legend label.

    With more than ``limit``, those arriving first at the channel heads when
    every one is dated, otherwise the most significant.
    """
    kps = list(result.knickpoints)
    if len(kps) <= limit:
        return kps, f"knickpoint ({len(kps)})"
    if all(k.get("arrival_years") for k in kps):  # dated: the ones reaching the channel heads first
        kps.sort(key=lambda k: k["arrival_years"]["best"])
        which = "arriving soonest"
    else:
        kps.sort(key=lambda k: (k.get("p_value", 1.0), -abs(k.get("delta_ksn", 0.0))))
        which = "most significant"
    return kps[:limit], f"knickpoint ({limit} {which} of {len(result.knickpoints)})"


def _chi_knickpoint_handles(result: Assessment, n_above: int, n_below: int) -> list:
    """Legend of the χ–elevation knickpoints: drawn, without χ from the common base, and not selected.

    The three counts add up to every reported knickpoint.
    """
    handles = []
    if n_above:
        handles.append(_knickpoint_handle(f"knickpoint above the common base level ({n_above})"))
    if n_below:
        # below the common base level χ from it is undefined: these are drawn on the map and long profiles
        handles.append(Line2D([], [], ls="none", label=f"{n_below} knickpoint{'s' if n_below > 1 else ''} below "
                                                       "the common base level: no χ from it, shown on the map "
                                                       "and the long profiles"))
    rest = len(result.knickpoints) - n_above - n_below
    if rest:
        handles.append(Line2D([], [], ls="none", label=f"{rest} more knickpoints not drawn (as on the map; all "
                                                       "are in the tables and layers)"))
    return handles


def _knickpoint_size(n: int) -> float:
    """Marker area (points²) shrinking as markers crowd."""
    return float(np.clip(38.0 * np.sqrt(40.0 / max(n, 1)), 14.0, 38.0))


def _knickpoint_handle(label: str) -> Line2D:
    return Line2D([], [], marker="v", color="black", markerfacecolor="white", ls="none", label=label)


def _side_legend_handles(result: Assessment) -> list:
    return [Patch(facecolor=SIDE_COLOURS[s], alpha=0.45, edgecolor="none", label=side_label(result, s))
            for s in ("a", "b")]


def _verdict_title(result: Assessment) -> str:
    v = result.verdict
    if v.moves_toward in ("a", "b"):
        what = f"divide moving into {side_label(result, v.moves_toward)}"
        if v.basis == "chi":
            what += " (long-run tendency)"
    else:
        what = {"stable": "divide stable", "undetermined": "direction undetermined"}.get(v.moves_toward,
                                                                                          v.moves_toward)
    return f"{what}; confidence {v.confidence:.2f}"


# ------------------------------------------------------------------ figures
def _draw_motion_divide(fig: Figure, ax, result: Assessment, frame: _Frame) -> list:
    """The divide as a dark outline under a line coloured by the local evidence of motion."""
    index = motion_index(result)
    pts = result.points
    _divide_lines(ax, result, frame, color="black", lw=4.2, zorder=3, solid_capstyle="round")
    segments, values = [], []
    for line in np.unique(pts.line):
        sel = np.flatnonzero(pts.line == line)
        if sel.size < 2:
            continue
        xy = np.column_stack([pts.x[sel] * frame.scale, pts.y[sel] * frame.scale])
        segments.extend(np.stack([xy[:-1], xy[1:]], axis=1))
        values.extend(0.5 * (index[sel][:-1] + index[sel][1:]))
    cmap = colormaps[MOTION_CMAP].with_extremes(bad="0.55")  # grey where no measure is available
    lc = LineCollection(segments, cmap=cmap, linewidths=2.6, zorder=4, capstyle="round")
    lc.set_array(np.ma.masked_invalid(np.asarray(values, dtype=float)))
    lc.set_clim(-1, 1)
    ax.add_collection(lc)
    bar = fig.colorbar(lc, ax=ax, shrink=0.7, pad=0.02, ticks=[-1, 0, 1])
    bar.ax.set_yticklabels(["into a", "neutral", "into b"])
    bar.set_label("Local evidence of divide motion (−1 … +1)")
    return [Line2D([], [], color="black", lw=4, label="divide (coloured by local evidence)")]


def _draw_arrows(ax, result: Assessment, frame: _Frame, count: int = 9) -> list:
    """Arrows from evenly spaced divide points in the direction of the verdict (none without one)."""
    v = result.verdict
    pts = result.points
    if v.moves_toward not in ("a", "b") or pts.size == 0:
        return []
    sign = 1.0 if v.moves_toward == "b" else -1.0  # points.normal points from a into b
    dem = result.dem
    length_m = 0.07 * float(np.median(dem.dx)) * dem.shape[1]  # 7 % of the map's width
    pick = np.unique(np.linspace(0, pts.size - 1, count + 2).round().astype(int)[1:-1]) if pts.size > 2 \
        else np.arange(pts.size)
    per_e, per_n = _metres_to_axis(dem, frame, pts.y[pick])
    for j, i in enumerate(pick):
        x0, y0 = pts.x[i] * frame.scale, pts.y[i] * frame.scale
        x1 = x0 + sign * pts.normal[i, 0] * length_m * per_e[j]
        y1 = y0 + sign * pts.normal[i, 1] * length_m * per_n[j]
        ax.annotate("", xy=(x1, y1), xytext=(x0, y0), zorder=6,
                    arrowprops=dict(arrowstyle="simple,head_width=0.7,head_length=0.8,tail_width=0.28",
                                    fc="white", ec="black", lw=0.9, shrinkA=0, shrinkB=0))
    return [Line2D([], [], marker=r"$\rightarrow$", color="black", ls="none", markersize=14,
                   label=f"direction of motion (into side {v.moves_toward})")]


def _draw_equilibrium(ax, result: Assessment, frame: _Frame) -> list:
    eq = result.equilibrium
    drew = False
    for line in np.unique(eq.line):
        sel = (eq.line == line) & np.isfinite(eq.shift_m)
        if np.count_nonzero(sel) >= 2:
            ax.plot(eq.x[sel] * frame.scale, eq.y[sel] * frame.scale, color="black", lw=1.3, ls=(0, (5, 3)),
                    zorder=5, path_effects=_HALO)
            drew = True
    return [Line2D([], [], color="black", lw=1.5, ls=(0, (5, 3)), label="equilibrium divide (first-order)")] \
        if drew else []


def _draw_knickpoints(ax, result: Assessment, frame: _Frame) -> list:
    shown, label = _shown_knickpoints(result)
    if not shown:
        return []
    kx = np.array([k["x"] for k in shown]) * frame.scale
    ky = np.array([k["y"] for k in shown]) * frame.scale
    ax.scatter(kx, ky, marker="v", s=_knickpoint_size(len(shown)), facecolor="white", edgecolor="black",
               linewidth=0.8, zorder=7, gid="knickpoints")
    return [_knickpoint_handle(label)]


def map_figure(result: Assessment) -> Figure:
    """Map: shaded relief, the two sides, channels, the divide coloured by local motion, arrows, knickpoints."""
    fig, ax, frame, seg, pos = _map_base(result, extra=1.9, tint=0.22)
    if len(seg):
        ax.add_collection(LineCollection(seg, colors="#0b2e59", linewidths=_channel_widths(result.channels.area[pos]),
                                         alpha=0.75, zorder=2, capstyle="round"))
    handles = _side_legend_handles(result) + [Line2D([], [], color="#0b2e59", lw=1.4, label="channels analysed")]
    handles += _draw_motion_divide(fig, ax, result, frame)
    handles += _draw_arrows(ax, result, frame)
    handles += _draw_equilibrium(ax, result, frame)
    handles += _draw_knickpoints(ax, result, frame)
    handles += filled_voids(ax, result.dem, frame, result.voids)
    ax.set_title(f"Divide between {side_label(result, 'a')} and {side_label(result, 'b')}\n{_verdict_title(result)}",
                 fontsize=11)
    fig.legend(handles=handles, loc="outside lower center", ncol=3, fontsize=8, frameon=False)
    return fig


def chi_map_figure(result: Assessment) -> Figure:
    """χ of the analysed channels on the shaded relief."""
    fig, ax, frame, seg, pos = _map_base(result, extra=1.3, tint=0.12)
    chi = result.profiles.chi
    if len(seg):
        lc = LineCollection(seg, cmap="cividis", linewidths=0.6 + 1.2 * _channel_widths(result.channels.area[pos]),
                            zorder=3, capstyle="round")
        lc.set_array(np.nan_to_num(chi[pos], nan=0.0))
        finite = chi[np.isfinite(chi)]
        top = float(np.percentile(finite, 99)) if finite.size else 1.0  # a few long paths would wash out the rest
        lc.set_clim(0.0, top or 1.0)
        ax.add_collection(lc)
        extend = "max" if finite.size and float(np.max(finite)) > top else "neither"
        bar = fig.colorbar(lc, ax=ax, shrink=0.75, pad=0.02, extend=extend)
        bar.set_label(f"χ (m), θ = {result.profiles.theta:.2f}, A₀ = {result.profiles.a0:g} m²")
    _divide_lines(ax, result, frame, color="white", lw=3.6, zorder=4)
    _divide_lines(ax, result, frame, color="black", lw=1.6, zorder=5)
    handles = _side_legend_handles(result) + [Line2D([], [], color="black", lw=1.6, label="divide")]
    fig.legend(handles=handles, loc="outside lower center", ncol=3, fontsize=8, frameon=False)
    ax.set_title(f"χ from the common base level ({result.base.elevation_m:.0f} m)", fontsize=11)
    return fig


def _side_xy_collection(result: Assessment, side: str, x: np.ndarray, y: np.ndarray) -> LineCollection | None:
    """Segments cell -> downstream cell of one side's analysed channels in (x, y) plot values."""
    channels = result.channels
    code = 1 if side == "a" else 2
    kept = np.flatnonzero(result.profiles.side == code)
    down = channels.down[kept]
    ok = down >= 0
    kept, down = kept[ok], down[ok]
    ok = np.isfinite(x[kept]) & np.isfinite(x[down]) & np.isfinite(y[kept]) & np.isfinite(y[down])
    kept, down = kept[ok], down[ok]
    if kept.size == 0:
        return None
    seg = np.stack([np.column_stack([x[kept], y[kept]]), np.column_stack([x[down], y[down]])], axis=1)
    return LineCollection(seg, colors=SIDE_COLOURS[side], linewidths=0.9 if kept.size < 5000 else 0.5, alpha=0.75)


def chi_elevation_figure(result: Assessment) -> Figure:
    """Elevation against χ of every analysed channel, by side, with knickpoints."""
    fig = _figure(7.5, 5.2)
    ax = fig.add_subplot()
    chi = result.profiles.chi
    z = result.channels.elevation
    for side in ("a", "b"):
        lc = _side_xy_collection(result, side, chi, z)
        if lc is not None:
            ax.add_collection(lc)
    handles = [Line2D([], [], color=SIDE_COLOURS[s], lw=2, label=side_label(result, s)) for s in ("a", "b")]
    shown, _ = _shown_knickpoints(result)
    above = [k for k in shown if np.isfinite(k.get("chi_base", np.nan))]
    if above:  # at χ from the common base level, the χ of this axis
        ax.scatter([k["chi_base"] for k in above], [k["elevation_m"] for k in above], marker="v",
                   s=_knickpoint_size(len(above)), facecolor="white", edgecolor="black", linewidth=0.8, zorder=4,
                   gid="knickpoints")
    handles += _chi_knickpoint_handles(result, len(above), len(shown) - len(above))
    ax.axhline(result.base.elevation_m, color="0.4", lw=0.8, ls=":", zorder=1)
    handles.append(Line2D([], [], color="0.4", lw=0.8, ls=":", label="common base level"))
    ax.autoscale_view()
    ax.set_xlim(left=0)
    ax.set_xlabel(f"χ (m), θ = {result.profiles.theta:.2f}, A₀ = {result.profiles.a0:g} m²")
    ax.set_ylabel("Elevation (m)")
    ax.grid(True, color="0.9", lw=0.6)
    ax.legend(handles=handles, loc="upper left", fontsize=8, frameon=True, framealpha=0.9)
    ax.set_title("χ–elevation profiles by side", fontsize=11)
    return fig


_METRIC_LABELS = {
    "chi": "χ at the channel heads",
    "channel_elevation": "Channel elevation at the reference area",
    "hillslope_gradient": "Mean gradient above the reference area",
    "local_relief": "Local relief above the reference area",
    "hillslope_relief": "Hillslope relief (divide − channel head)",
}


def _fmt(v: float) -> str:
    if not np.isfinite(v):
        return "n/a"
    return f"{v:.3f}" if abs(v) < 1 else f"{v:.3g}" if abs(v) < 100 else f"{v:,.0f}"


def contrast_orientation(metric: str) -> float:
    """+1 when a positive a − b of ``metric`` means the divide moves into b, −1 when into a.

    Plotting ``sign × (a − b)`` puts "into b" on the right in every panel.
    """
    rule = METRICS.get(metric, ("", "higher"))[1]
    return -1.0 if rule == "higher" else 1.0  # "higher": the divide moves toward the higher side


def contrast_figure(result: Assessment) -> Figure:
    """One row per metric with its difference and 95 % interval; left = into side a, right = into side b in every row."""
    contrasts = result.contrasts
    n = max(len(contrasts), 1)
    fig = _figure(7.5, 1.05 * n + 1.0)
    axes = fig.subplots(n, 1, squeeze=False)[:, 0]
    name_a, name_b = side_label(result, "a"), side_label(result, "b")
    for ax, c in zip(axes, contrasts):
        sign = contrast_orientation(c.metric)
        d = sign * c.difference
        lo, hi = sorted((sign * c.ci95[0], sign * c.ci95[1]))
        span = max(abs(v) for v in (lo, hi, d, 0.0) if np.isfinite(v)) if np.isfinite(d) else 1.0
        span = 1.25 * span if span > 0 else 1.0
        ax.axvspan(0, span, color=SIDE_COLOURS["b"], alpha=0.16, lw=0)
        ax.axvspan(-span, 0, color=SIDE_COLOURS["a"], alpha=0.16, lw=0)
        ax.axvline(0, color="0.3", lw=0.8)
        ax.text(0.995, 0.9, f"into {name_b} →", transform=ax.transAxes, ha="right", va="top", fontsize=7.5,
                color="0.2")
        ax.text(0.005, 0.9, f"← into {name_a}", transform=ax.transAxes, ha="left", va="top", fontsize=7.5,
                color="0.2")
        if np.isfinite(d):
            evidence = c.moves_toward in ("a", "b")
            ax.errorbar([d], [0], xerr=[[d - lo], [hi - d]], fmt="o",
                        ms=7, color="black", mfc="black" if evidence else "white", mew=1.3, capsize=4, lw=1.5)
            note = f"a {_fmt(c.a)}, b {_fmt(c.b)} {c.unit}; n = {c.n_points}"
        else:
            note = f"not enough points on both sides (n = {c.n_points})"
        ax.set_xlim(-span, span)
        ax.set_ylim(-1, 1)
        ax.set_yticks([])
        ax.set_xlabel(f"{'a − b' if sign > 0 else 'b − a'} ({c.unit})", fontsize=8, labelpad=1)
        ax.tick_params(axis="x", labelsize=8)
        ax.set_title(f"{_METRIC_LABELS.get(c.metric, c.metric)}: {note}", fontsize=8.5, loc="left")
    fig.suptitle("Across-divide contrasts with 95 % intervals (filled: counts as evidence)", fontsize=10.5)
    return fig


def _main_streams(result: Assessment, side: str, count: int = 3) -> list:
    dist = result.channels.distance_upstream
    streams = [s for s in result.profiles.streams if s.side == side and s.nodes.size >= 2]
    streams.sort(key=lambda s: dist[s.nodes[-1]] - dist[s.nodes[0]], reverse=True)
    return streams[:count]


#: Long profiles: side a to the left of the channel heads, side b to the right.
_MIRROR = {"a": -1.0, "b": 1.0}


def _to_outlet(down: np.ndarray, head: int) -> np.ndarray:
    """Channel positions from ``head`` down to its network's outlet (below the common base level too)."""
    path = [int(head)]
    while down[path[-1]] >= 0 and len(path) <= down.size:
        path.append(int(down[path[-1]]))
    return np.array(path, dtype=np.int64)


def profile_figure(result: Assessment) -> Figure:
    """Long profiles, mirrored about their channel heads, down to each network's own outlet.

    The three longest channels of each side and every channel holding a drawn knickpoint.
    """
    fig = _figure(8.0, 5.4)
    ax = fig.add_subplot()
    channels = result.channels
    dist = channels.distance_upstream
    z = channels.elevation
    shown, label = _shown_knickpoints(result)
    styles = ["-", "--", ":"]
    handles = []
    drawn_heads: set[int] = set()
    for side, sign in _MIRROR.items():
        for rank, s in enumerate(_main_streams(result, side)):
            head = int(s.nodes[-1])
            nodes = _to_outlet(channels.down, head)
            drawn_heads.add(head)
            from_head = (dist[head] - dist[nodes]) / 1000.0
            ax.plot(sign * from_head, z[nodes], color=SIDE_COLOURS[side], ls=styles[rank % 3], lw=1.6)
            handles.append(Line2D([], [], color=SIDE_COLOURS[side], ls=styles[rank % 3], lw=1.6,
                                  label=f"side {side}, channel {rank + 1} "
                                        f"({(dist[head] - dist[nodes[-1]]) / 1000:.1f} km)"))
    # a knickpoint lies on the channel from its own head to its network outlet: draw that channel too,
    # so every knickpoint sits on a profile whether or not it is above the common base level
    extra: set[str] = set()
    for k in shown:
        head = int(k["head_position"])
        if head in drawn_heads:
            continue
        drawn_heads.add(head)
        nodes = _to_outlet(channels.down, head)
        ax.plot(_MIRROR[k["side"]] * (dist[head] - dist[nodes]) / 1000.0, z[nodes], color=SIDE_COLOURS[k["side"]],
                lw=0.8, alpha=0.7, zorder=2)
        extra.add(k["side"])
    handles += [Line2D([], [], color=SIDE_COLOURS[side], lw=0.8, alpha=0.7,
                       label=f"side {side}, other channels with knickpoints") for side in sorted(extra)]
    if shown:
        # distance from the knickpoint's own channel head: independent of where χ starts
        kx = [_MIRROR[k["side"]] * (dist[int(k["head_position"])] - dist[int(k["position"])]) / 1000.0
              for k in shown]
        ax.scatter(kx, [k["elevation_m"] for k in shown], marker="v", s=40, facecolor="white", edgecolor="black",
                   linewidth=0.9, zorder=4, gid="knickpoints")
        below = sum(1 for k in shown if not np.isfinite(k.get("chi_base", np.nan)))
        handles.append(_knickpoint_handle(f"{label}; {below} below the common base level" if below else label))
    ax.axvline(0, color="0.5", lw=0.8, ls=":")
    ax.axhline(result.base.elevation_m, color="0.5", lw=0.8, ls=":")
    handles.append(Line2D([], [], color="0.5", lw=0.8, ls=":", label="common base level"))
    ax.autoscale_view()
    ax.text(0.01, 0.98, f"← {side_label(result, 'a')}", transform=ax.transAxes, ha="left", va="top",
            fontsize=8.5, color=SIDE_COLOURS["a"], fontweight="bold")
    ax.text(0.99, 0.98, f"{side_label(result, 'b')} →", transform=ax.transAxes, ha="right", va="top",
            fontsize=8.5, color="#9A6400", fontweight="bold")  # a darker orange, legible as text
    ax.set_xlabel("Distance from the channel head (km): side a to the left, side b to the right")
    ax.set_ylabel("Elevation (m)")
    lo, hi = ax.get_xlim()
    xt = [t for t in ax.get_xticks() if lo <= t <= hi]
    ax.set_xticks(xt)
    ax.set_xticklabels([f"{abs(t):g}" for t in xt])  # distances, positive on both sides
    ax.set_xlim(lo, hi)
    ax.grid(True, color="0.9", lw=0.6)
    fig.legend(handles=handles, loc="outside lower center", ncol=3, fontsize=7.5, frameon=False)
    ax.set_title("Long profiles of the main channels, down to each network's outlet", fontsize=11)
    return fig


def slope_area_figure(result: Assessment) -> Figure:
    """Channel gradient against drainage area by side, with binned medians and the fitted power law."""
    fig = _figure(7.5, 5.2)
    ax = fig.add_subplot()
    prof = result.profiles
    area = result.channels.area
    with np.errstate(invalid="ignore", divide="ignore"):
        slope = prof.ksn_slope_area / (area / prof.a0) ** prof.theta  # ksn_sa = S (A/A0)^θ
    rng = np.random.default_rng(0)
    handles = []
    for side, code, marker in (("a", 1, "o"), ("b", 2, "s")):
        sel = np.flatnonzero((prof.side == code) & np.isfinite(slope) & (slope > 0) & (area > 0))
        if sel.size == 0:
            continue
        shown = rng.choice(sel, size=min(sel.size, 4000), replace=False) if sel.size > 4000 else sel
        ax.scatter(area[shown], slope[shown], s=4, color=SIDE_COLOURS[side], alpha=0.25, lw=0)
        la = np.log10(area[sel])
        edges = np.arange(np.floor(la.min() * 5), np.ceil(la.max() * 5) + 1) / 5  # 5 bins per decade
        which = np.digitize(la, edges)
        bx, by = [], []
        for b in np.unique(which):
            inside = sel[which == b]
            if inside.size >= 5:
                bx.append(np.median(area[inside]))
                by.append(np.median(slope[inside]))
        ax.plot(bx, by, marker=marker, ls="none", ms=7, mfc=SIDE_COLOURS[side], mec="black", mew=0.8)
        handles.append(Line2D([], [], marker=marker, ls="none", ms=7, mfc=SIDE_COLOURS[side], mec="black",
                              label=f"{side_label(result, side)}: binned medians"))
    fit = prof.concavity.get("slope_area")
    if fit is not None and np.isfinite(fit.value) and "log_ks" in fit.scores:
        ok = (prof.side > 0) & (area > 0)
        a_line = np.logspace(np.log10(area[ok].min()), np.log10(area[ok].max()), 50)
        s_line = 10 ** fit.scores["log_ks"] * a_line ** (-fit.value)
        lo, hi = fit.ci95
        ax.plot(a_line, s_line, color="black", lw=1.6)
        handles.append(Line2D([], [], color="black", lw=1.6,
                              label=rf"fit $S = k_s A^{{-\theta}}$: θ = {fit.value:.2f} (95 % {lo:.2f}–{hi:.2f}), "
                                    rf"$k_s$ = {10 ** fit.scores['log_ks']:.3g}"))
    else:
        ax.text(0.02, 0.03, "no slope–area fit (too few channel cells with a gradient)", transform=ax.transAxes,
                fontsize=8)
    thr = result.channels.threshold.value_m2
    ax.axvline(thr, color="0.4", lw=0.8, ls=":")
    handles.append(Line2D([], [], color="0.4", lw=0.8, ls=":", label=f"channel threshold ({thr:.3g} m²)"))
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("Drainage area A (m²)")
    ax.set_ylabel("Channel gradient S (m/m)")
    ax.grid(True, which="major", color="0.9", lw=0.6)
    ax.legend(handles=handles, fontsize=8, loc="lower left", framealpha=0.9)
    ax.set_title("Slope–area", fontsize=11)
    return fig
