"""Writers: what rasterio and the stdlib json module read back, and atomicity."""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pytest
import rasterio
from affine import Affine
from rasterio.enums import Compression

from divides.errors import GridError, OutputError, ParameterError
from divides.io.dem import Dem
from divides.io.reading import read_dem
from divides.io.writing import atomic_write, write_json, write_raster, write_text

UTM = "EPSG:32630"
T30 = Affine(30.0, 0, 400000.0, 0, -30.0, 5_700_000.0)


def _dem(rows: int = 12, cols: int = 15, crs=UTM, transform=T30) -> Dem:
    z = np.linspace(100, 400, rows * cols, dtype=np.float32).reshape(rows, cols)
    return Dem.from_array(z, transform=transform, crs=crs)


# ------------------------------------------------------------------ rasters
def test_raster_lands_on_the_dem_grid(tmp_path: Path) -> None:
    dem = _dem()
    values = dem.elevation * 2
    values[3, 4] = np.nan
    out = write_raster(tmp_path / "double.tif", values, dem, description="twice the elevation")
    with rasterio.open(out) as src:  # rasterio's view of the file
        assert src.driver == "GTiff" and src.count == 1
        assert src.transform == dem.transform and src.crs == dem.crs
        assert src.dtypes[0] == "float32" and np.isnan(src.nodata)
        assert src.compression == Compression.deflate
        assert src.descriptions[0] == "twice the elevation"
        back = src.read(1, masked=True)
    assert back.mask[3, 4] and back.mask.sum() == 1
    np.testing.assert_array_equal(back.filled(np.nan), values)


def test_round_trip_through_read_dem(tmp_path: Path) -> None:
    dem = _dem()
    path = write_raster(tmp_path / "dem.tif", dem.elevation, dem)
    again = read_dem(path)
    np.testing.assert_array_equal(again.elevation, dem.elevation)
    assert again.transform == dem.transform and again.crs == dem.crs
    np.testing.assert_array_equal(again.cell_area, dem.cell_area)


def test_geographic_round_trip(tmp_path: Path) -> None:
    size = 1 / 1200
    dem = _dem(crs="EPSG:4269", transform=Affine(size, 0, -90.0, 0, -size, 40.0))
    again = read_dem(write_raster(tmp_path / "geo.tif", dem.elevation, dem))
    assert again.crs == dem.crs and again.ellipsoid.name == "GRS 1980"
    # GeoTIFF keys store a and b, so 1/f comes back with rounding noise (~1e-14).
    assert again.ellipsoid.inverse_flattening == pytest.approx(dem.ellipsoid.inverse_flattening, rel=1e-12)
    np.testing.assert_allclose(again.dx, dem.dx, rtol=1e-12)


def test_big_rasters_are_tiled_small_ones_are_not(tmp_path: Path) -> None:
    big = _dem(300, 280)
    with rasterio.open(write_raster(tmp_path / "big.tif", big.elevation, big)) as src:
        assert src.profile["tiled"] and src.block_shapes == [(256, 256)]  # rasterio's block layout
    small = _dem()
    with rasterio.open(write_raster(tmp_path / "small.tif", small.elevation, small)) as src:
        assert not src.profile["tiled"]


def test_boolean_masks_are_bytes(tmp_path: Path) -> None:
    dem = _dem()
    mask = dem.elevation > 250
    with rasterio.open(write_raster(tmp_path / "mask.tif", mask, dem)) as src:
        assert src.dtypes[0] == "uint8" and src.nodata is None
        np.testing.assert_array_equal(src.read(1), mask.astype(np.uint8))


def test_nan_cells_take_the_given_nodata(tmp_path: Path) -> None:
    dem = _dem()
    values = dem.elevation.copy()
    values[0, :] = np.nan
    with rasterio.open(write_raster(tmp_path / "nd.tif", values, dem, nodata=-9999.0)) as src:
        assert src.nodata == -9999.0
        assert np.all(src.read(1)[0] == -9999.0)
    with rasterio.open(write_raster(tmp_path / "i16.tif", values, dem, nodata=-32768, dtype="int16")) as src:
        assert src.dtypes[0] == "int16" and src.nodata == -32768
        back = src.read(1)
        assert np.all(back[0] == -32768)
        np.testing.assert_array_equal(back[1:], values[1:].astype(np.int16))


def test_the_dem_of_a_local_grid_has_no_crs(tmp_path: Path) -> None:
    dem = Dem.from_array(np.ones((4, 4), np.float32), cell_size=2.0)
    with rasterio.open(write_raster(tmp_path / "local.tif", dem.elevation, dem)) as src:
        assert src.crs is None and src.transform == dem.transform


def test_raster_shape_must_match_the_dem(tmp_path: Path) -> None:
    dem = _dem()
    with pytest.raises(GridError, match=r"'.*wrong\.tif'.*shape \(12, 14\) but the DEM grid is \(12, 15\)"):
        write_raster(tmp_path / "wrong.tif", np.zeros((12, 14)), dem)
    assert not (tmp_path / "wrong.tif").exists()


def test_unstorable_values_are_refused(tmp_path: Path) -> None:
    dem = _dem()
    with_nan = dem.elevation.copy()
    with_nan[0, 0] = np.nan
    with pytest.raises(ParameterError, match=r"'.*a\.tif'.*NaN cells but dtype int16 cannot store NaN; give a nodata"):
        write_raster(tmp_path / "a.tif", with_nan, dem, dtype="int16")
    with pytest.raises(ParameterError, match=r"nodata 100000 does not fit dtype int16 \(an integer from -32768 to 32767\)"):
        write_raster(tmp_path / "b.tif", dem.elevation, dem, dtype="int16", nodata=100000)
    with pytest.raises(ParameterError, match=r"values range from 100.0 to 400.0, outside dtype int8"):
        write_raster(tmp_path / "c.tif", dem.elevation, dem, dtype="int8")
    with pytest.raises(ParameterError, match=r"dtype complex64 cannot be stored in a GeoTIFF band; use one of uint8"):
        write_raster(tmp_path / "d.tif", dem.elevation, dem, dtype="complex64")
    assert list(tmp_path.iterdir()) == []


def test_raster_into_a_missing_folder(tmp_path: Path) -> None:
    dem = _dem()
    target = tmp_path / "no" / "such" / "r.tif"
    with pytest.raises(OutputError, match=r"cannot write output '.*no/such/r\.tif': No such file or directory"):
        write_raster(target, dem.elevation, dem)
    write_raster(target, dem.elevation, dem, parents=True)
    assert target.is_file()


# ------------------------------------------------------------------ atomic writes
def test_atomic_write_uses_a_temporary_file_beside_the_target(tmp_path: Path) -> None:
    target = tmp_path / "summary.json"
    with atomic_write(target) as tmp:
        assert tmp.parent == target.parent and tmp != target and tmp.exists()
        assert tmp.suffix == ".json"  # format-sniffing writers (matplotlib, GDAL) keep working
        assert not target.exists()  # nothing visible until the block succeeds
        tmp.write_text("{}")
    assert target.read_text() == "{}"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["summary.json"]


def test_failure_leaves_no_file_and_no_temporary(tmp_path: Path) -> None:
    target = tmp_path / "report.html"
    with pytest.raises(RuntimeError, match="figure failed"):
        with atomic_write(target) as tmp:
            tmp.write_text("<html>half")
            raise RuntimeError("figure failed")
    assert list(tmp_path.iterdir()) == []


def test_failure_keeps_the_previous_file(tmp_path: Path) -> None:
    target = tmp_path / "verdict.txt"
    target.write_text("previous verdict")
    with pytest.raises(ValueError):
        with atomic_write(target) as tmp:
            tmp.write_text("new")
            raise ValueError("boom")
    assert target.read_text() == "previous verdict"
    assert [p.name for p in tmp_path.iterdir()] == ["verdict.txt"]


def test_success_replaces_the_previous_file(tmp_path: Path) -> None:
    target = tmp_path / "verdict.txt"
    target.write_text("old")
    write_text(target, "new")
    assert target.read_text() == "new"


def test_new_files_get_ordinary_permissions(tmp_path: Path) -> None:
    # Same mode as a file made with plain open() under the same umask (POSIX).
    ordinary = tmp_path / "ordinary.txt"
    ordinary.write_text("x")
    ours = write_text(tmp_path / "ours.txt", "x")
    assert (os.stat(ours).st_mode & 0o777) == (os.stat(ordinary).st_mode & 0o777)


def test_unwritable_locations_are_output_errors(tmp_path: Path) -> None:
    blocker = tmp_path / "file.txt"
    blocker.write_text("I am a file")
    with pytest.raises(OutputError, match=r"cannot write output '.*file\.txt/out\.json': Not a directory"):
        write_json(blocker / "out.json", {})
    with pytest.raises(OutputError, match=r"cannot create the folder of output '.*file\.txt/sub/out\.json'"):
        write_json(blocker / "sub" / "out.json", {}, parents=True)
    folder = tmp_path / "figures"
    folder.mkdir()
    with pytest.raises(OutputError, match=r"cannot write output '.*figures': it is an existing directory"):
        write_text(folder, "x")
    with pytest.raises(OSError):  # OutputError is an OSError too, for callers catching that
        write_text(blocker / "x.txt", "x")


def test_os_errors_inside_the_block_name_the_target(tmp_path: Path) -> None:
    target = tmp_path / "layer.geojson"
    with pytest.raises(OutputError, match=r"cannot write output '.*layer\.geojson': No space left on device"):
        with atomic_write(target):
            raise OSError(28, "No space left on device")  # errno 28 is ENOSPC on POSIX
    assert list(tmp_path.iterdir()) == []


# ------------------------------------------------------------------ text and JSON
def test_write_text_is_exact(tmp_path: Path) -> None:
    text = "Moves toward b\r\nconfidence 0.8 — élevé\n"
    path = write_text(tmp_path / "v.txt", text)
    assert path.read_bytes() == text.encode("utf-8")


def test_write_json_is_strict_json(tmp_path: Path) -> None:
    obj = {
        "schema": "divides.assessment/1",
        "ci95": (np.float32(0.25), np.float64(0.75)),
        "shape": np.array([200, 240]),
        "count": np.int64(7),
        "flag": np.bool_(True),
        "rate": float("nan"),
        "high": float("inf"),
        "path": Path("a/b.tif"),
        3: "integer key",
    }
    path = write_json(tmp_path / "summary.json", obj)

    def refuse(token: str):  # stdlib json would otherwise accept NaN/Infinity tokens
        raise AssertionError(f"non-standard JSON token {token}")

    back = json.loads(path.read_text(encoding="utf-8"), parse_constant=refuse)
    assert back == {
        "schema": "divides.assessment/1",
        "ci95": [0.25, 0.75],
        "shape": [200, 240],
        "count": 7,
        "flag": True,
        "rate": None,  # RFC 8259 has no NaN: null
        "high": None,
        "path": "a/b.tif",
        "3": "integer key",
    }


def test_write_json_refuses_unknown_objects_before_creating_a_file(tmp_path: Path) -> None:
    with pytest.raises(TypeError):
        write_json(tmp_path / "bad.json", {"x": object()})
    assert list(tmp_path.iterdir()) == []


def test_feature_collection_streams_strict_geojson(tmp_path):
    # Reference: the standard library's JSON parser (RFC 8259) and RFC 7946's FeatureCollection layout.
    import json

    from divides.io.writing import write_feature_collection

    def features():  # a generator: the writer must not need a list
        yield {"type": "Feature", "geometry": {"type": "LineString", "coordinates": [[7.0, 46.0], [7.5, 46.25]]},
               "properties": {"n": np.int64(3), "x": np.float32(0.5), "bad": float("nan")}}
        yield {"type": "Feature", "geometry": None, "properties": {"path": tmp_path.name}}

    out = write_feature_collection(tmp_path / "sub" / "layer.geojson", features(), parents=True)
    doc = json.loads(out.read_text(), parse_constant=lambda c: pytest.fail(f"non-strict constant {c}"))
    assert doc["type"] == "FeatureCollection" and len(doc["features"]) == 2
    assert doc["features"][0]["properties"] == {"n": 3, "x": 0.5, "bad": None}
    assert doc["features"][0]["geometry"]["coordinates"][1] == [7.5, 46.25]
    empty = write_feature_collection(tmp_path / "empty.geojson", [])
    assert json.loads(empty.read_text()) == {"type": "FeatureCollection", "features": []}
