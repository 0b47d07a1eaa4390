"""GIS outputs checked against RFC 7946, pyproj, rasterio and the csv module."""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import numpy as np
import pytest
import rasterio
from pyproj import Transformer

from divides.report import layers

GEOMETRY_TYPES = {"Point", "MultiPoint", "LineString", "MultiLineString", "Polygon", "MultiPolygon",
                  "GeometryCollection"}  # RFC 7946 §1.4


def _reject_constant(name: str):
    raise ValueError(f"non-standard JSON constant {name}")


def _load(path: Path) -> dict:
    return json.loads(path.read_text(encoding="utf-8"), parse_constant=_reject_constant)


def _check_position(pos) -> None:
    # RFC 7946 §3.1.1: a position is two or three numbers, longitude then latitude (WGS 84, §4)
    assert isinstance(pos, list) and len(pos) in (2, 3)
    assert all(isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) for v in pos)
    lon, lat = pos[0], pos[1]
    assert -180.0 <= lon <= 180.0 and -90.0 <= lat <= 90.0
    # about 7 decimals (1 cm) is the precision asked of the layers (RFC 7946 §11.2 advises 6 are enough)
    assert round(lon, 7) == lon and round(lat, 7) == lat


def _check_geometry(geom: dict) -> None:
    assert geom["type"] in GEOMETRY_TYPES
    kind, coords = geom["type"], geom["coordinates"]
    if kind == "Point":
        _check_position(coords)
    elif kind == "LineString":
        assert len(coords) >= 2  # RFC 7946 §3.1.4
        for pos in coords:
            _check_position(pos)
    elif kind in ("Polygon", "MultiPolygon"):
        for polygon in (coords if kind == "MultiPolygon" else [coords]):
            for k, ring in enumerate(polygon):
                # RFC 7946 §3.1.6: closed rings of four or more positions, exterior counterclockwise, holes clockwise
                assert len(ring) >= 4 and ring[0] == ring[-1]
                for pos in ring:
                    _check_position(pos)
                lon, lat = np.array(ring).T
                assert (float(np.sum(lon[:-1] * lat[1:] - lon[1:] * lat[:-1])) > 0) == (k == 0)
    else:  # the layers use points, lines and (filled holes) polygons
        pytest.fail(f"unexpected geometry {kind}")


def _check_feature_collection(doc: dict) -> None:
    assert doc["type"] == "FeatureCollection"  # RFC 7946 §3.3
    assert "crs" not in doc  # RFC 7946 §4 removed the "crs" member
    assert isinstance(doc["features"], list)
    for f in doc["features"]:
        assert f["type"] == "Feature"  # §3.2
        assert "crs" not in f
        assert "geometry" in f and "properties" in f  # both members are required (§3.2)
        assert f["properties"] is None or isinstance(f["properties"], dict)
        _check_geometry(f["geometry"])


@pytest.fixture(scope="module")
def docs(written) -> dict[str, dict]:
    _, out, _ = written
    return {p.stem: _load(p) for p in sorted((out / "layers").glob("*.geojson"))}


@pytest.fixture(scope="module")
def fallen():
    """A model ridge 20 kyr after a 10 m fall of its eastern base level, with a CRS: real knickpoints,
    each with an arrival time (K given, n = 1; tests/assess/test_invariance.py)."""
    from affine import Affine

    import divides
    from divides.model import scenarios as S
    from divides.model.simulate import simulate

    shape = (40, 80)
    steady = S.symmetric_divide(shape, seed=1).run(duration=3e6, dt=2e4).final
    fall = S.base_level_fall(shape, side="east", drop=10.0, seed=4)
    z = simulate(steady, duration=2e4, dt=4e3, **fall.options).final.elevation
    dem = divides.Dem.from_array(z, transform=Affine(100.0, 0.0, 448_200.0, 0.0, -100.0, 6_231_600.0),
                                 crs="EPSG:32630")
    return divides.assess(dem, "west", "east", closed_edges=("north", "south"), robustness=False,
                          n_bootstrap=100, erodibility=2e-5, dem_error_m=0.1, channel_area_m2=2e5)


def test_every_layer_follows_rfc_7946(docs, fallen) -> None:
    assert set(docs) == {"channels", "divide_points", "divide_lines", "knickpoints", "equilibrium_divide"}
    for name, doc in docs.items():
        _check_feature_collection(doc)
        assert doc["features"], f"{name} is empty on the demo"
    knick = layers.geojson_layers(fallen)["knickpoints"]
    _check_feature_collection(json.loads(json.dumps(knick, allow_nan=False)))
    assert knick["features"]


def test_the_demo_aggressor_keeps_its_knickpoints_below_the_common_base_level(written) -> None:
    # demo/README.md: the Tallow's base level (side a, west) fell 40 m and keeps falling, and a wave of
    # incision is climbing its valleys; the common base level is the Quern Water's outlet (180 m), above
    # most of the Tallow's channels. Knickpoints are searched from each network's own outlet, so the
    # aggressor side has some, below that base level too (Whipple & Tucker 1999; Royden & Perron 2013).
    result, _, _ = written
    kps = result.knickpoints
    on_a = [k for k in kps if k["side"] == "a"]
    assert on_a and len(on_a) >= len(kps) - len(on_a)
    assert any(k["elevation_m"] < result.base.elevation_m and math.isnan(k["chi_base"]) for k in on_a)


def test_divide_points_map_back_to_the_dem_crs(written, docs) -> None:
    result, _, _ = written
    # pyproj, not rasterio's warp (which the layers use), carries the points back into the DEM's CRS
    back = Transformer.from_crs("EPSG:4326", result.dem.crs.to_wkt(), always_xy=True)
    feats = docs["divide_points"]["features"]
    assert len(feats) == result.points.size
    lon = np.array([f["geometry"]["coordinates"][0] for f in feats])
    lat = np.array([f["geometry"]["coordinates"][1] for f in feats])
    x, y = back.transform(lon, lat)
    np.testing.assert_allclose(x, result.points.x, atol=1.0)
    np.testing.assert_allclose(y, result.points.y, atol=1.0)


def test_knickpoints_map_back_and_carry_arrival_times(fallen) -> None:
    result = fallen
    back = Transformer.from_crs("EPSG:4326", result.dem.crs.to_wkt(), always_xy=True)
    feats = layers.geojson_layers(result)["knickpoints"]["features"]
    assert feats and len(feats) == len(result.knickpoints)
    for f, kp in zip(feats, result.knickpoints):
        x, y = back.transform(*f["geometry"]["coordinates"])
        assert abs(x - kp["x"]) < 1.0 and abs(y - kp["y"]) < 1.0
        p = f["properties"]
        assert p["side"] in ("a", "b")
        # K was given and n = 1 (every celerity defined), so each has low <= best <= high (years, positive)
        assert 0 < p["arrival_years_low"] <= p["arrival_years_best"] <= p["arrival_years_high"]


NEW_KNICKPOINT_KEYS = ("chi_base_m", "q_value", "celerity_defined", "celerity_note")


def _same_number(layer_value, summary_value) -> bool:
    # RFC 7946 properties are plain JSON: NaN is written as null in both files
    if summary_value is None or (isinstance(summary_value, float) and math.isnan(summary_value)):
        return layer_value is None
    return layer_value == pytest.approx(summary_value, rel=1e-12)


def test_knickpoint_layer_carries_chi_base_q_and_celerity_as_in_the_summary(written, docs) -> None:
    result, out, _ = written
    summary = _load(out / "summary.json")["knickpoints"]
    feats = docs["knickpoints"]["features"]
    assert len(feats) == len(summary) == len(result.knickpoints)
    assert any(s["chi_base"] is None for s in summary)  # the demo has knickpoints below the base level
    for f, s in zip(feats, summary):
        p = f["properties"]
        assert set(NEW_KNICKPOINT_KEYS) <= set(p)
        assert _same_number(p["chi_base_m"], s["chi_base"])
        assert _same_number(p["chi_m"], s["chi"])
        assert _same_number(p["q_value"], s["q_value"])
        assert p["celerity_defined"] is s["celerity_defined"] and isinstance(p["celerity_defined"], bool)
        assert p["celerity_note"] == s["celerity_note"] and isinstance(p["celerity_note"], str)
        # Benjamini & Hochberg (1995): an adjusted p is never below the raw p, and a knickpoint is
        # reported when q < 0.05 (docs/output-formats.md)
        assert p["p_value"] <= p["q_value"] < 0.05
        # χ from the common base is χ from the own outlet less one constant per network, and the
        # common base is at or above every network outlet: it is never the larger of the two
        if p["chi_base_m"] is not None:
            assert 0.0 <= p["chi_base_m"] <= p["chi_m"] + 1e-9
        else:
            assert p["elevation_m"] <= result.base.elevation_m + 1e-6
    table = _read_csv(out / "tables" / "knickpoints.csv")
    assert len(table) == len(feats)
    for row, f in zip(table, feats):
        p = f["properties"]
        # stdlib csv (RFC 4180): null is an empty cell, booleans are written true / false
        assert row["chi_base_m"] == ("" if p["chi_base_m"] is None else row["chi_base_m"])
        if p["chi_base_m"] is not None:
            assert float(row["chi_base_m"]) == pytest.approx(p["chi_base_m"], rel=1e-9)
        assert float(row["q_value"]) == pytest.approx(p["q_value"], rel=1e-9)
        assert row["celerity_defined"] == ("true" if p["celerity_defined"] else "false")
        assert row["celerity_note"] == p["celerity_note"]


def test_fallen_ridge_knickpoints_have_a_defined_celerity_in_the_layer(fallen) -> None:
    doc = json.loads(json.dumps(layers.geojson_layers(fallen)["knickpoints"], allow_nan=False))
    _check_feature_collection(doc)  # RFC 7946, with no NaN left in the properties
    feats = doc["features"]
    assert feats and len(feats) == len(fallen.knickpoints)
    for f, kp in zip(feats, fallen.knickpoints):
        p = f["properties"]
        # n = 1: the stream-power celerity does not depend on the slope, every break moves upstream as a
        # unit (Whipple & Tucker 1999; Royden & Perron 2013), so each is defined and dated
        assert p["celerity_defined"] is True and p["arrival_years_best"] is not None
        assert p["celerity_note"] == kp["celerity_note"]
        assert p["p_value"] <= p["q_value"] < 0.05  # Benjamini & Hochberg (1995)
        assert _same_number(p["chi_base_m"], kp["chi_base"])


def test_divide_point_properties_hold_both_sides_and_their_difference(written, docs) -> None:
    result, _, _ = written
    for i, f in enumerate(docs["divide_points"]["features"]):
        p = f["properties"]
        for metric, (va, vb) in result.points.values.items():
            a, b, d = p[f"{metric}_a"], p[f"{metric}_b"], p[f"{metric}_difference"]
            if math.isfinite(va[i]) and math.isfinite(vb[i]):
                assert a == pytest.approx(va[i]) and b == pytest.approx(vb[i])
                assert d == pytest.approx(a - b, abs=1e-9)
            else:
                assert d is None  # JSON null where a side has no value
        assert p["motion_index"] is None or -1.0 <= p["motion_index"] <= 1.0


def test_channel_lines_run_down_channels(written, docs) -> None:
    result, _, _ = written
    dem = result.dem
    to_crs = Transformer.from_crs("EPSG:4326", dem.crs.to_wkt(), always_xy=True)
    threshold = result.channels.threshold.value_m2
    filled = result.flow.conditioned.surface
    feats = docs["channels"]["features"]
    assert feats
    for f in feats:
        p = f["properties"]
        assert p["side"] in ("a", "b") and p["area_m2"] >= threshold and p["length_m"] > 0
        lon, lat = np.array(f["geometry"]["coordinates"]).T
        rows, cols = rasterio.transform.rowcol(dem.transform, *to_crs.transform(lon, lat))
        rows, cols = np.asarray(rows), np.asarray(cols)
        # vertices are cell centres of channel cells, each an 8-neighbour of the next (D8 paths)
        assert np.all(result.flow.area[rows, cols] >= threshold)
        assert np.all(np.maximum(np.abs(np.diff(rows)), np.abs(np.diff(cols))) == 1)
        # a depression-filled surface never rises along a flow path (Barnes et al. 2014), so
        # lines drawn downstream never climb
        z = filled[rows, cols]
        assert np.all(np.diff(z) <= 1e-6)


def test_geojson_layers_need_a_crs(demo_result) -> None:
    import dataclasses

    local = dataclasses.replace(demo_result, dem=dataclasses.replace(demo_result.dem, crs=None))
    assert layers.geojson_layers(local) == {}


# ------------------------------------------------------------------ rasters
def test_rasters_land_on_the_dem_grid_with_the_analysed_values(written) -> None:
    result, out, _ = written
    dem = result.dem
    expected = {
        "chi": result.profiles.grid(result.profiles.chi),
        "ksn": result.profiles.grid(result.profiles.ksn),
    }
    for name, values in expected.items():
        with rasterio.open(out / "rasters" / f"{name}.tif") as src:  # rasterio's own reading
            assert src.transform == dem.transform and src.crs == dem.crs
            assert (src.height, src.width) == dem.shape and src.count == 1
            back = src.read(1)
        want = values.astype(np.float32)
        np.testing.assert_array_equal(np.isnan(back), np.isnan(want))
        np.testing.assert_array_equal(back[~np.isnan(back)], want[~np.isnan(want)])
    # χ exists exactly on the analysed channel cells of either side
    chi = expected["chi"]
    assert np.count_nonzero(np.isfinite(chi)) == np.count_nonzero(result.profiles.side > 0)


def test_side_raster_matches_the_side_masks(written) -> None:
    result, out, _ = written
    with rasterio.open(out / "rasters" / "sides.tif") as src:
        assert src.transform == result.dem.transform and src.crs == result.dem.crs
        labels = src.read(1)
        nodata = src.nodata
    a, b = result.sides.a.mask, result.sides.b.mask
    assert not np.any(a & b)
    # labels stated in the brief: 1 side a, 2 side b, 0 neither; nodata where the DEM has none
    assert np.all(labels[a] == 1) and np.all(labels[b] == 2)
    valid = result.dem.valid
    assert np.all(labels[valid & ~a & ~b] == 0)
    assert np.all(labels[~valid] == nodata)
    assert set(np.unique(labels)) <= {0, 1, 2, int(nodata)}


# ------------------------------------------------------------------ tables
def _read_csv(path: Path) -> list[dict]:
    with path.open(newline="", encoding="utf-8") as fh:  # stdlib csv, RFC 4180 dialect
        return list(csv.DictReader(fh))


def test_tables_parse_and_agree_with_the_assessment(written, docs) -> None:
    result, out, _ = written
    contrasts = _read_csv(out / "tables" / "contrasts.csv")
    assert [r["metric"] for r in contrasts] == [c.metric for c in result.contrasts]
    for row, c in zip(contrasts, result.contrasts):
        assert float(row["ci95_low"]) <= float(row["difference"]) <= float(row["ci95_high"])
        assert float(row["difference"]) == pytest.approx(float(row["a"]) - float(row["b"]), rel=1e-8)
        assert row["moves_toward"] == c.moves_toward
    points = _read_csv(out / "tables" / "divide_points.csv")
    assert len(points) == result.points.size
    feats = docs["divide_points"]["features"]
    for row, f in zip(points, feats):
        assert [float(row["lon"]), float(row["lat"])] == f["geometry"]["coordinates"]
        assert float(row["x"]) == pytest.approx(f["properties"]["x"])
    knick = _read_csv(out / "tables" / "knickpoints.csv")
    assert len(knick) == len(result.knickpoints)
    streams = _read_csv(out / "tables" / "streams.csv")
    assert len(streams) == len(result.profiles.streams)
    assert {r["side"] for r in streams} <= {"a", "b"}
    # the streams are those above the common base level: they hold every knickpoint above it
    above = [k for k in result.knickpoints if math.isfinite(k["chi_base"])]
    assert sum(int(r["n_knickpoints"]) for r in streams) >= len(above)
    for r in streams:
        assert float(r["top_elevation_m"]) >= float(r["bottom_elevation_m"])  # streams climb to their heads


def test_csv_quotes_awkward_text() -> None:
    text = layers.csv_text([{"name": 'a "quoted", comma', "value": float("nan"), "flag": True}])
    rows = list(csv.reader(text.splitlines()))  # stdlib parser: RFC 4180 quoting
    assert rows == [["name", "value", "flag"], ['a "quoted", comma', "", "true"]]


def test_filled_holes_are_a_polygon_layer_of_their_true_area(demo_result) -> None:
    # Holes of nodata filled by interpolation are written as RFC 7946 polygons, one per hole (8-connected), with
    # their cell count and area; the polygon's geodesic area on WGS 84 (pyproj's Geod, a general-purpose reference)
    # matches the cells' area (12 x 10 and 3 x 3 cells of 30 m, within 0.5 % for the UTM scale factor). A hole
    # with an island of data inside has the island as an interior ring. Without filled cells: no layer.
    import dataclasses

    from pyproj import Geod

    from divides.terrain.voids import VoidFill

    assert "filled_voids" not in layers.geojson_layers(demo_result)
    mask = np.zeros(demo_result.dem.shape, dtype=bool)
    mask[60:70, 40:52] = True
    mask[64:66, 45:47] = False  # an island of data inside the first hole
    mask[100:103, 150:153] = True
    voids = VoidFill("fill", holes=2, cells=int(mask.sum()), largest_cells=116, filled_cells=int(mask.sum()),
                     filled=mask)
    doc = layers.geojson_layers(dataclasses.replace(demo_result, voids=voids))["filled_voids"]
    _check_feature_collection(json.loads(json.dumps(doc, allow_nan=False)))
    props = [f["properties"] for f in doc["features"]]
    assert [p["cells"] for p in props] == [116, 9]
    geod = Geod(ellps="WGS84")
    for feature, cells in zip(doc["features"], (116, 9), strict=True):
        rings = feature["geometry"]["coordinates"]
        assert len(rings) == (2 if cells == 116 else 1)
        area = sum(abs(geod.polygon_area_perimeter(*np.array(ring).T)[0]) * (1 if k == 0 else -1)
                   for k, ring in enumerate(rings))
        assert area == pytest.approx(cells * 900.0, rel=5e-3)
        assert feature["properties"]["area_m2"] == pytest.approx(cells * 900.0)
