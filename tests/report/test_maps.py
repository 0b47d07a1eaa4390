"""Maps a practitioner can file: scale bar, north arrow, CRS; colours that survive greyscale; one orientation.

References: pyproj (the EPSG registry's CRS names, geodesic lengths on WGS 84),
the grid-convergence formula of a transverse Mercator projection on the sphere
(γ = atan(tan(λ − λ0) · sin φ); Snyder 1987, "Map projections: a working
manual", USGS PP 1395, chapter 8, from memory; the ellipsoid differs by
hundredths of a degree), the relative luminance of sRGB colours (WCAG 2.0),
and the direction rules of the metrics (Willett et al. 2014 for χ, Forte &
Whipple 2018 for the near-divide measures).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from affine import Affine
from matplotlib import colormaps
from matplotlib.colors import to_rgb
from matplotlib.text import Annotation
from mpl_toolkits.axes_grid1.anchored_artists import AnchoredSizeBar
from pyproj import Geod

import divides
from divides.assess.contrasts import Contrast
from divides.report import figures


def _luminance(rgb) -> float:
    """Relative luminance of an sRGB colour (WCAG 2.0 definition)."""
    lin = [c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb[:3]]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def _furniture(ax):
    bars = [a for a in ax.artists if isinstance(a, AnchoredSizeBar)]
    arrows = [t for t in ax.texts if isinstance(t, Annotation) and t.get_gid() == "north-arrow"]
    return bars, arrows


@pytest.mark.parametrize("draw", ["map_figure", "chi_map_figure"])
def test_every_map_has_a_scale_bar_a_north_arrow_and_its_crs(demo_result, draw):
    ax = getattr(figures, draw)(demo_result).axes[0]
    bars, arrows = _furniture(ax)
    assert len(bars) == 1 and len(arrows) == 1
    # the demo DEM is in EPSG:32630, named so in the EPSG registry
    assert ax.get_xlabel().endswith("WGS 84 / UTM zone 30N (EPSG:32630)")


def test_the_regional_map_has_them_too(demo_result):
    from divides.assess.screen import screen
    from divides.report.screening import regional_map

    ax = regional_map(screen(demo_result.dem, seed=0)).axes[0]
    bars, arrows = _furniture(ax)
    assert len(bars) == 1 and len(arrows) == 1 and "(EPSG:32630)" in ax.get_xlabel()


def _scale_bar_metres(ax) -> tuple[float, float]:
    """(length written on the bar in metres, length drawn in axis units)."""
    bar = next(a for a in ax.artists if isinstance(a, AnchoredSizeBar))
    text = bar.txt_label.get_text()
    value, unit = text.split()
    metres = float(value) * (1000.0 if unit == "km" else 1.0)
    rect = bar.size_bar.get_children()[0]
    return metres, rect.get_width()


def test_scale_bar_of_a_projected_map_is_true_to_its_label(demo_result):
    metres, width = _scale_bar_metres(figures.map_figure(demo_result).axes[0])
    assert width == pytest.approx(metres / 1000.0)  # axes in km of the projected CRS (metres)
    assert str(metres).rstrip("0").rstrip(".")[0] in "125"  # a round 1, 2 or 5 × 10^k (common practice)


def test_scale_bar_of_a_geographic_map_matches_the_geodesic(geographic_result):
    ax = figures.map_figure(geographic_result).axes[0]
    metres, width_deg = _scale_bar_metres(ax)
    left, bottom, right, top = geographic_result.dem.bounds
    lat = 0.5 * (bottom + top)
    # the same span of longitude measured on the WGS 84 ellipsoid by pyproj
    geodesic = Geod(ellps="WGS84").line_length([10.0, 10.0 + width_deg], [lat, lat])
    assert geodesic == pytest.approx(metres, rel=2e-3)


@pytest.mark.parametrize("lon", [-8.0, -3.0, 1.5])
def test_north_arrow_points_to_true_north(lon):
    # a DEM in UTM zone 30N (central meridian 3° W) centred on (lon, 56° N)
    from pyproj import Transformer

    x, y = Transformer.from_crs("EPSG:4326", "EPSG:32630", always_xy=True).transform(lon, 56.0)
    dem = divides.Dem.from_array(np.zeros((10, 10)), transform=Affine(30, 0, x - 150, 0, -30, y + 150),
                                 crs="EPSG:32630")
    angle, true = figures.true_north(dem)
    gamma = math.degrees(math.atan(math.tan(math.radians(lon + 3.0)) * math.sin(math.radians(56.0))))
    # east of the central meridian meridians lean west going north: true north is anticlockwise of grid north
    assert true and angle == pytest.approx(-gamma, abs=0.05)


def test_grid_without_crs_says_grid_north_and_no_crs():
    dem = divides.Dem.from_array(np.zeros((10, 10)), cell_size=30.0)
    assert figures.true_north(dem) == (0.0, False)
    assert figures.crs_label(dem).startswith("no CRS")


def test_colours_survive_greyscale_printing():
    # the motion colour map: lightness rises monotonically from "into a" to "into b"
    cmap = colormaps[figures.MOTION_CMAP]
    lum = [_luminance(cmap(v)) for v in np.linspace(0, 1, 64)]
    assert all(b > a for a, b in zip(lum, lum[1:]))
    # the two sides differ in lightness, not only in hue (WCAG contrast ratio above 1.5)
    la, lb = (_luminance(to_rgb(figures.SIDE_COLOURS[s])) for s in ("a", "b"))
    assert (max(la, lb) + 0.05) / (min(la, lb) + 0.05) > 1.5


def _marker_x(ax) -> float:
    line = next(line for line in ax.lines if line.get_marker() == "o")
    return float(line.get_xdata()[0])


def test_contrast_panels_all_read_the_same_way(demo_result):
    # every measure of the demo points into side b (its verdict); each panel must put it on the right
    fig = figures.contrast_figure(demo_result)
    for ax, c in zip(fig.axes, demo_result.contrasts):
        left, right = (t.get_text() for t in sorted(ax.texts, key=lambda t: t.get_position()[0]))
        assert "into side a" in left and "into side b" in right
        if c.moves_toward == "b":
            assert _marker_x(ax) > 0, c.metric
    # rules from the literature: higher χ / channel elevation loses ground, higher gradient/relief gains it.
    # A case built here: side a higher in χ (into a) and steeper (into b) -> left and right.
    chi = Contrast("chi", "m", 6.0, 3.0, 3.0, (2.5, 3.5), "a", 40, "higher χ")
    grad = Contrast("hillslope_gradient", "m/m", 0.3, 0.2, 0.1, (0.08, 0.12), "b", 40, "lower hillslope gradient")
    fig = figures.contrast_figure(dataclasses.replace(demo_result, contrasts=[chi, grad]))
    assert _marker_x(fig.axes[0]) == pytest.approx(-3.0) and _marker_x(fig.axes[1]) == pytest.approx(0.1)
    assert fig.axes[0].get_xlabel().startswith("b − a") and fig.axes[1].get_xlabel().startswith("a − b")


def test_named_sides_appear_in_the_figures(demo_result):
    config = dataclasses.replace(demo_result.config, name_a="River Tallow", name_b="Quern Water")
    named = dataclasses.replace(demo_result, config=config)
    title = figures.map_figure(named).axes[0].get_title()
    assert "River Tallow (side a)" in title and "Quern Water (side b)" in title
    texts = [t.get_text() for ax in figures.contrast_figure(named).axes for t in ax.texts]
    assert any("into Quern Water (side b)" in t for t in texts)


@pytest.mark.parametrize("shape", [(10, 10), (70, 240), (40, 400), (300, 60)])
def test_north_arrow_stays_inside_the_map_whatever_its_shape(shape):
    # A strip of DEM makes a short map: the arrow and its "N" must stay inside the map and clear of the title above
    # it (a 0.42 in arrow from 78 % of the height ran through the title of a 70 x 240 cell map). Judged on the boxes
    # matplotlib's renderer draws after the constrained layout (a general-purpose reference).
    dem = divides.Dem.from_array(np.zeros(shape), cell_size=30.0)
    frame = figures._frame(dem)
    fig = figures._figure(*figures._map_size(dem, frame, extra=2.0))
    ax = fig.add_subplot()
    ext = figures._extent(dem, frame)
    ax.set_xlim(ext[0], ext[1])
    ax.set_ylim(ext[2], ext[3])
    ax.set_aspect(frame.aspect)
    ax.set_title("a title as long as the regional map's, above the map", fontsize=10)
    figures.map_furniture(fig, ax, dem, frame)
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    inside = ax.get_window_extent(renderer)
    (arrow,) = _furniture(ax)[1]
    letter = next(t for t in ax.texts if t.get_text() in ("N", "N (grid)"))
    for mark in (arrow, letter):
        box = mark.get_window_extent(renderer)
        assert inside.x0 <= box.x0 and box.x1 <= inside.x1 and inside.y0 <= box.y0 and box.y1 <= inside.y1, shape
    assert not letter.get_window_extent(renderer).overlaps(ax.title.get_window_extent(renderer))


def test_the_divide_map_marks_filled_voids_in_its_legend(demo_result):
    # A legend for every mark: the assessment's map hatches the cells filled by interpolation and names them in its
    # legend; with none filled there is neither.
    from divides.report.figures import map_figure
    from divides.terrain.voids import VoidFill

    mask = np.zeros(demo_result.dem.shape, dtype=bool)
    mask[60:70, 40:52] = True
    for voids, marked in ((VoidFill("fill", 1, 120, 120, 120, filled=mask), True), (VoidFill(), False)):
        fig = map_figure(dataclasses.replace(demo_result, voids=voids))
        labels = [t.get_text() for t in fig.legends[0].get_texts()]
        hatched = [c for c in fig.axes[0].collections if list(getattr(c, "hatches", None) or []) == ["xxxx"]]
        assert ("nodata filled by interpolation" in labels) == marked == bool(hatched)
