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
