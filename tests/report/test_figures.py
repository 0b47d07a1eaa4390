"""Figures and layers on other kinds of grid (geographic, no CRS), and the motion index worked by hand."""

from __future__ import annotations

import io
import json
import math
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
from affine import Affine
from PIL import Image
from pyproj import Transformer

import divides
from divides.report import figures, layers

DEMO = Path(__file__).resolve().parents[2] / "demo" / "uplands.tif"


def test_geographic_layers_are_the_grid_coordinates(geographic_result) -> None:
    result = geographic_result
    feats = layers.divide_point_features(result)
    lon = np.array([f["geometry"]["coordinates"][0] for f in feats])
    lat = np.array([f["geometry"]["coordinates"][1] for f in feats])
    # EPSG:4326 coordinates are already longitude/latitude (pyproj agrees, always_xy order)
    x, y = Transformer.from_crs("EPSG:4326", "EPSG:4326", always_xy=True).transform(lon, lat)
    np.testing.assert_allclose(x, result.points.x, atol=1e-7)
    np.testing.assert_allclose(y, result.points.y, atol=1e-7)


def test_geographic_figures_use_degrees_and_render(geographic_result) -> None:
    fig = figures.map_figure(geographic_result)
    ax = fig.axes[0]
    # the CRS line under the axis label: EPSG:4326 is "WGS 84" in the EPSG registry (pyproj's copy)
    assert ax.get_xlabel() == "Longitude (°)\nWGS 84 (EPSG:4326)" and ax.get_ylabel() == "Latitude (°)"
    # at 47° N a degree of longitude is cos(47°) as long as one of latitude (spherical approximation)
    assert ax.get_aspect() == pytest.approx(1 / math.cos(math.radians(46.97)), rel=1e-3)
    lo, hi = ax.get_xlim()
    assert 10.0 - 1e-9 <= lo < hi <= 10.0 + 240 * 0.0004 + 1e-9
    with Image.open(io.BytesIO(figures.to_png(fig))) as img:
        assert img.format == "PNG"


def test_longitudes_wrap_into_plus_minus_180() -> None:
    # RFC 7946 §4 asks for longitudes within ±180; a grid over the antimeridian written as 179.9…180.1
    dem = divides.Dem.from_array(np.full((4, 4), 100.0), transform=Affine(0.05, 0, 179.95, 0, -0.05, 10.0),
                                 crs="EPSG:4326")
    lon, lat = layers._lonlat(dem, np.array([179.975, 180.075]), np.array([9.975, 9.975]))
    np.testing.assert_allclose(lon, [179.975, -179.925])
    np.testing.assert_allclose(lat, [9.975, 9.975])


def test_a_dem_without_crs_gets_rasters_but_no_geojson(demo_result, tmp_path: Path) -> None:
    import dataclasses

    local = dataclasses.replace(demo_result, dem=dataclasses.replace(demo_result.dem, crs=None))
    out = local.write(tmp_path / "out")
    assert not (out / "layers").exists() or not any((out / "layers").iterdir())
    assert sorted(p.name for p in (out / "rasters").iterdir()) == ["chi.tif", "ksn.tif", "sides.tif"]
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["dem"]["crs"] is None
    assert "no coordinate reference system" in (out / "report.html").read_text(encoding="utf-8")
    assert figures.map_figure(local).axes[0].get_xlabel() == "x (km)\nno CRS: local grid in metres"


def test_motion_index_worked_by_hand() -> None:
    nan = float("nan")
    values = {  # two points: one favouring side b on every count, the same with sides swapped
        "channel_elevation": (np.array([110.0, 130.0, nan]), np.array([130.0, 110.0, nan])),
        "hillslope_gradient": (np.array([0.3, 0.1, nan]), np.array([0.1, 0.3, nan])),
        "local_relief": (np.array([200.0, 100.0, nan]), np.array([100.0, 200.0, nan])),
        "hillslope_relief": (np.array([100.0, 100.0, nan]), np.array([100.0, 100.0, nan])),
        "chi": (np.array([1.0, 9.0, 5.0]), np.array([9.0, 1.0, 5.0])),  # χ is not a near-divide measure
    }
    result = SimpleNamespace(points=SimpleNamespace(values=values, size=3),
                             base=SimpleNamespace(elevation_m=100.0))
    index = layers.motion_index(result)
    # by hand: channel elevation above base 10 vs 30 -> (30-10)/20 = 1; gradient 0.2/0.2 = 1;
    # relief 100/150 = 2/3; hillslope relief 0; mean (1 + 1 + 2/3 + 0) / 4 = 2/3
    assert index[0] == pytest.approx(2 / 3)
    assert index[1] == pytest.approx(-2 / 3)
    assert math.isnan(index[2])


def test_figure_functions_return_drawable_figures(demo_result) -> None:
    for name, function in figures.FIGURES.items():
        fig = getattr(figures, function)(demo_result)
        assert fig.axes, name
        for ax in fig.axes:
            if ax.get_label() == "<colorbar>":
                continue
            assert ax.get_xlabel() and (ax.get_ylabel() or name == "contrasts"), name  # axes carry units


def _arrows(fig):
    from matplotlib.text import Annotation

    # the north arrow is an annotation too; it is told apart by its gid
    return [t for t in fig.axes[0].texts if isinstance(t, Annotation) and t.get_gid() != "north-arrow"]


def test_map_arrows_point_into_the_victim_side(demo_result) -> None:
    # the demo's side a drains off the west edge and side b off the east edge, so motion into b
    # is eastward (larger easting) and motion into a westward (geometry of the demo, by construction)
    import dataclasses

    for victim, east in (("b", True), ("a", False)):
        verdict = dataclasses.replace(demo_result.verdict, moves_toward=victim,
                                      aggressor="a" if victim == "b" else "b")
        arrows = _arrows(figures.map_figure(dataclasses.replace(demo_result, verdict=verdict)))
        assert arrows
        for arrow in arrows:
            (x_head, _), (x_tail, _) = arrow.xy, arrow.xyann
            assert bool(x_head > x_tail) == east


def test_figures_without_a_direction_or_knickpoints(demo_result) -> None:
    import dataclasses

    from divides.assess.contrasts import Contrast

    nan = float("nan")
    verdict = dataclasses.replace(demo_result.verdict, moves_toward="stable", aggressor=None)
    empty = Contrast("chi", "m", nan, nan, nan, (nan, nan), "none", 1, "higher χ")
    bare = dataclasses.replace(demo_result, verdict=verdict, knickpoints=[], contrasts=[empty])
    assert _arrows(figures.map_figure(bare)) == []  # no direction, no arrows
    for name, function in figures.FIGURES.items():
        with Image.open(io.BytesIO(figures.to_png(getattr(figures, function)(bare)))) as img:
            assert img.format == "PNG", name


# ------------------------------------------------------------ knickpoints drawn = knickpoints reported
def _knickpoint_marks(fig) -> np.ndarray:
    """Offsets (data coordinates) of the knickpoint markers of a figure's first axes."""
    from matplotlib.collections import PathCollection

    marks = [c for c in fig.axes[0].collections if isinstance(c, PathCollection) and c.get_gid() == "knickpoints"]
    assert len(marks) <= 1
    return np.asarray(marks[0].get_offsets()) if marks else np.zeros((0, 2))


def _legend_texts(fig) -> list[str]:
    legends = [ax.get_legend() for ax in fig.axes if ax.get_legend() is not None] + list(fig.legends)
    return [t.get_text() for lg in legends for t in lg.get_texts()]


def _count(texts: list[str], pattern: str) -> int:
    import re

    found = [int(m.group(1)) for t in texts for m in [re.search(pattern, t)] if m]
    return sum(found)


def test_the_demo_has_knickpoints_on_both_sides_of_the_common_base_level(demo_result) -> None:
    # demo/README.md: the Tallow (side a) lost 40 m of base level and a wave of incision climbs its
    # valleys, mostly below the common base level (180 m): the figures below must handle both cases
    chi_base = np.array([k["chi_base"] for k in demo_result.knickpoints])
    assert np.isnan(chi_base).any() and np.isfinite(chi_base).any()


def test_chi_elevation_draws_the_knickpoints_above_the_base_and_counts_the_others(demo_result) -> None:
    kps = demo_result.knickpoints
    above = [k for k in kps if math.isfinite(k["chi_base"])]
    fig = figures.chi_elevation_figure(demo_result)
    marks = _knickpoint_marks(fig)
    # the x axis is χ from the common base level, so each mark sits at the knickpoint's chi_base
    # (summary.json) and its elevation: nothing below the base can be placed on it
    assert len(marks) == len(above)
    np.testing.assert_allclose(np.sort(marks[:, 0]), np.sort([k["chi_base"] for k in above]))
    np.testing.assert_allclose(np.sort(marks[:, 1]), np.sort([k["elevation_m"] for k in above]))
    texts = _legend_texts(fig)
    drawn = _count(texts, r"above the common base level \((\d+)\)")
    below = _count(texts, r"^(\d+) knickpoints? below the common base level")
    assert drawn == len(marks)
    assert drawn + below == len(kps)  # the legend accounts for every reported knickpoint


def _on_a_line(ax, x: float, y: float, tol_x: float, tol_y: float) -> bool:
    for line in ax.get_lines():
        lx, ly = (np.asarray(v, dtype=float) for v in line.get_data())
        if lx.size < 2:
            continue
        if np.any((np.abs(lx - x) <= tol_x) & (np.abs(ly - y) <= tol_y)):
            return True
    return False


def test_long_profiles_draw_every_knickpoint_on_a_drawn_channel(demo_result) -> None:
    kps = demo_result.knickpoints
    fig = figures.profile_figure(demo_result)
    marks = _knickpoint_marks(fig)
    assert len(marks) == len(kps)
    # side a to the left of the channel heads, side b to the right (the figure's stated layout)
    sides = sorted(k["side"] for k in kps)
    assert sorted("a" if x < 0 else "b" for x in marks[:, 0]) == sides
    np.testing.assert_allclose(np.sort(marks[:, 1]), np.sort([k["elevation_m"] for k in kps]))
    # every knickpoint, below the common base level too, sits on a drawn long profile: within one
    # cell's diagonal along the channel and 1 m in elevation (raw DEM vs the channel's elevation)
    cell_km = float(np.hypot(*np.abs(demo_result.dem.transform[:5:4]))) / 1000.0
    ax = fig.axes[0]
    for x, y in marks:
        assert _on_a_line(ax, x, y, 1.01 * cell_km, 1.0), (x, y)
    assert min(float(np.min(line.get_ydata())) for line in ax.get_lines() if len(line.get_ydata()) > 2) \
        < demo_result.base.elevation_m  # the profiles go down below the common base level
    texts = _legend_texts(fig)
    assert _count(texts, r"^knickpoint \((\d+)\)") == len(kps)
    below = sum(1 for k in kps if math.isnan(k["chi_base"]))
    assert _count(texts, r"; (\d+) below the common base level") == below


def test_the_map_draws_every_knickpoint(demo_result) -> None:
    fig = figures.map_figure(demo_result)
    marks = _knickpoint_marks(fig)
    kps = demo_result.knickpoints
    assert len(marks) == len(kps)
    scale = 1 / 1000  # the demo's projected CRS in metres is drawn in km
    np.testing.assert_allclose(np.sort(marks[:, 0]), np.sort([k["x"] * scale for k in kps]))
    assert _count(_legend_texts(fig), r"^knickpoint \((\d+)\)") == len(kps)


def test_too_many_knickpoints_are_counted_not_dropped_silently(demo_result) -> None:
    import dataclasses

    many = [dict(k, p_value=k["p_value"] + 1e-6 * i) for i in range(30) for k in demo_result.knickpoints]
    crowded = dataclasses.replace(demo_result, knickpoints=many)
    total = len(many)
    assert total > figures.MAX_KNICKPOINTS
    fig = figures.chi_elevation_figure(crowded)
    texts = _legend_texts(fig)
    drawn = _count(texts, r"above the common base level \((\d+)\)")
    below = _count(texts, r"^(\d+) knickpoints? below the common base level")
    rest = _count(texts, r"^(\d+) more knickpoints not drawn")
    assert drawn == len(_knickpoint_marks(fig))
    assert drawn + below == figures.MAX_KNICKPOINTS and drawn + below + rest == total
    fig = figures.profile_figure(crowded)
    assert len(_knickpoint_marks(fig)) == figures.MAX_KNICKPOINTS
    assert f"of {total})" in " ".join(_legend_texts(fig))
