"""read_dem against rasterio's own reading, pyproj geodesics and unit definitions.

The GeoTIFFs are written with plain rasterio (``write_geotiff`` in conftest.py),
so every expectation comes from rasterio/pyproj/NIST, not from divides.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pyproj
import pytest
import rasterio
import rasterio.windows
from affine import Affine
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from divides.errors import BandError, CrsError, DemReadError, GridError, InputError, ParameterError
from divides.io.reading import read_dem

UTM = "EPSG:32630"
T30 = Affine(30.0, 0, 400000.0, 0, -30.0, 5_700_000.0)
US_SURVEY_FOOT = 1200.0 / 3937.0  # NIST SP 811 (2008), B.8
FOOT = 0.3048  # NIST SP 811, international foot

# dem.py flips south-up grids with Affine `*`, deprecated in affine 3.0 (PendingDeprecationWarning,
# an error in this run); drop this filter once dem.py composes transforms with `@`.


def _terrain(rows: int = 20, cols: int = 30, dtype=np.float32) -> np.ndarray:
    r, c = np.mgrid[0:rows, 0:cols]
    return (300 + 5 * r + 2 * c + 10 * np.sin(r / 3.0) * np.cos(c / 4.0)).astype(dtype)


def _rasterio_read(path: Path, band: int = 1):
    with rasterio.open(path) as src:
        return src.read(band), src.transform, src.crs, src.bounds


# ------------------------------------------------------------------ projected
def test_projected_metres_matches_rasterio(write_geotiff) -> None:
    path = write_geotiff("utm.tif", _terrain(), crs=UTM, transform=T30)
    dem = read_dem(path)
    expected, transform, crs, bounds = _rasterio_read(path)  # rasterio's reading of the same file
    np.testing.assert_array_equal(dem.elevation, expected)
    assert dem.elevation.dtype == np.float32  # float32 stays float32 (memory)
    assert dem.transform == transform and dem.crs == crs
    assert dem.bounds == pytest.approx(tuple(bounds))
    assert dem.cell_size_m == (30.0, 30.0) and np.all(dem.cell_area == 900.0)
    assert dem.path == str(path) and dem.valid.all()
    assert dem.meta["band"] == 1 and dem.meta["window"] is None


def test_float64_and_integer_sources_get_the_documented_dtype(write_geotiff) -> None:
    z = _terrain()
    assert read_dem(write_geotiff("f8.tif", z.astype(np.float64), crs=UTM, transform=T30)).elevation.dtype == np.float64
    dem = read_dem(write_geotiff("i2.tif", z.astype(np.int16), crs=UTM, transform=T30))
    assert dem.elevation.dtype == np.float32
    np.testing.assert_array_equal(dem.elevation, z.astype(np.int16))


@pytest.mark.parametrize(
    ("epsg", "unit", "foot"),
    [(2229, "us-ft", US_SURVEY_FOOT), (2223, "ft", FOOT)],  # California 5 (ftUS), Arizona Central (ft)
)
def test_projected_feet_cells_and_elevations_in_metres(write_geotiff, epsg: int, unit: str, foot: float) -> None:
    # pyproj confirms which foot the CRS is in; NIST gives its length.
    assert pyproj.CRS.from_epsg(epsg).axis_info[0].unit_conversion_factor == pytest.approx(foot, rel=1e-15)
    z = _terrain() * 3  # elevations in feet
    t = Affine(100.0, 0, 6_000_000.0, 0, -100.0, 2_100_000.0)
    dem = read_dem(write_geotiff("feet.tif", z, crs=f"EPSG:{epsg}", transform=t), vertical_unit=unit)
    np.testing.assert_allclose(dem.dx, 100 * foot, rtol=1e-12)
    np.testing.assert_allclose(dem.dy, 100 * foot, rtol=1e-12)
    np.testing.assert_allclose(dem.elevation, z * foot, rtol=1e-6)  # float32 arithmetic
    assert dem.vertical_unit == unit


# ------------------------------------------------------------------ geographic
@pytest.mark.parametrize(("epsg", "ellps"), [(4326, "WGS84"), (4269, "GRS80"), (4258, "GRS80")])
def test_geographic_cell_sizes_against_pyproj(write_geotiff, epsg: int, ellps: str) -> None:
    size = 1 / 3600  # 1 arc-second
    t = Affine(size, 0, 7.0, 0, -size, 61.0)
    dem = read_dem(write_geotiff("geo.tif", _terrain(12, 10), crs=f"EPSG:{epsg}", transform=t))
    assert dem.geographic
    assert dem.ellipsoid.name == pyproj.CRS.from_epsg(epsg).ellipsoid.name  # pyproj EPSG database
    geod = pyproj.Geod(ellps=ellps)
    for row in (0, 5, 11):
        top = 61.0 - row * size
        bottom, mid = top - size, top - size / 2
        assert dem.dy[row] == pytest.approx(geod.inv(7.0, bottom, 7.0, top)[2], rel=1e-9)  # pyproj
        assert dem.dx[row] == pytest.approx(geod.inv(7.0, mid, 7.0 + size, mid)[2], rel=1e-6)  # pyproj
        area, _ = geod.polygon_area_perimeter([7.0, 7.0 + size, 7.0 + size, 7.0], [bottom, bottom, top, top])
        assert dem.cell_area[row] == pytest.approx(abs(area), rel=1e-6)  # pyproj


def test_matplotlib_jacksboro_dem_through_a_geotiff(write_geotiff) -> None:
    # Real SRTM-derived elevations shipped with matplotlib ('ymin' is the northern edge).
    cbook = pytest.importorskip("matplotlib.cbook")
    data = cbook.get_sample_data("jacksboro_fault_dem.npz")
    dx, dy = float(data["dx"]), float(data["dy"])
    west, north = float(data["xmin"]), float(data["ymin"])
    t = Affine(dx, 0, west, 0, -dy, north)
    path = write_geotiff("jacksboro.tif", data["elevation"], crs="EPSG:4326", transform=t)
    dem = read_dem(path)
    np.testing.assert_array_equal(dem.elevation, data["elevation"])
    geod = pyproj.Geod(ellps="WGS84")
    mid = north - 200.5 * dy
    assert dem.dx[200] == pytest.approx(geod.inv(west, mid, west + dx, mid)[2], rel=1e-6)  # pyproj
    assert dem.dy[200] == pytest.approx(geod.inv(west, mid - dy / 2, west, mid + dy / 2)[2], rel=1e-9)
    # A lon/lat box: rasterio's from_bounds, rounded outward, says which cells it covers.
    box = (-84.3, 36.5, -84.2, 36.6)
    part = read_dem(path, bounds=box)
    w = rasterio.windows.from_bounds(*box, transform=t)
    r0, c0 = math.floor(w.row_off + 1e-9), math.floor(w.col_off + 1e-9)
    r1, c1 = math.ceil(w.row_off + w.height - 1e-9), math.ceil(w.col_off + w.width - 1e-9)
    np.testing.assert_array_equal(part.elevation, data["elevation"][r0:r1, c0:c1])


# ------------------------------------------------------------------ orientation
def test_south_up_file_equals_the_north_up_one(write_geotiff) -> None:
    z = _terrain()
    north_up = read_dem(write_geotiff("n.tif", z, crs=UTM, transform=T30))
    rows = z.shape[0]
    south_t = Affine(30.0, 0, T30.c, 0, 30.0, T30.f - rows * 30.0)  # same footprint, row 0 south
    south_up = read_dem(write_geotiff("s.tif", z[::-1], crs=UTM, transform=south_t))
    np.testing.assert_array_equal(south_up.elevation, north_up.elevation)
    assert south_up.transform.almost_equals(north_up.transform)
    # and windows of it too
    box = (T30.c + 95, T30.f - 400, T30.c + 400, T30.f - 35)
    np.testing.assert_array_equal(
        read_dem(south_up.path, bounds=box).elevation, read_dem(north_up.path, bounds=box).elevation
    )


# ------------------------------------------------------------------ windows
def test_bounds_on_cell_edges_read_exactly_that_block(write_geotiff) -> None:
    z = _terrain()
    path = write_geotiff("w.tif", z, crs=UTM, transform=T30)
    r0, r1, c0, c1 = 3, 11, 5, 17
    box = (T30.c + c0 * 30, T30.f - r1 * 30, T30.c + c1 * 30, T30.f - r0 * 30)
    dem = read_dem(path, bounds=box)
    np.testing.assert_array_equal(dem.elevation, z[r0:r1, c0:c1])
    # Upper-left corner of cell (r0, c0) by rasterio.transform.xy, cell size unchanged.
    west, north = rasterio.transform.xy(T30, r0, c0, offset="ul")
    assert dem.transform.almost_equals(Affine(30.0, 0, west, 0, -30.0, north))
    assert dem.bounds == pytest.approx(box)
    assert dem.meta["window"] == (r0, c0, r1 - r0, c1 - c0)


@settings(max_examples=40, deadline=None, database=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_any_box_reads_the_cells_it_touches(write_geotiff, data) -> None:
    z = _terrain()
    path = write_geotiff("h.tif", z, crs=UTM, transform=T30)
    rows, cols = z.shape
    # A box in cell units, possibly sticking out of the grid on any side.
    x0 = data.draw(st.floats(-5, cols - 0.5), label="x0")
    x1 = data.draw(st.floats(x0 + 0.25, cols + 5), label="x1")
    y0 = data.draw(st.floats(-5, rows - 0.5), label="y0")
    y1 = data.draw(st.floats(y0 + 0.25, rows + 5), label="y1")
    box = (T30.c + 30 * x0, T30.f - 30 * y1, T30.c + 30 * x1, T30.f - 30 * y0)
    # rasterio's from_bounds gives the fractional window; whole cells touched, clipped.
    w = rasterio.windows.from_bounds(*box, transform=T30)
    r0 = max(0, math.floor(w.row_off + 1e-6))
    c0 = max(0, math.floor(w.col_off + 1e-6))
    r1 = min(rows, math.ceil(w.row_off + w.height - 1e-6))
    c1 = min(cols, math.ceil(w.col_off + w.width - 1e-6))
    if r1 <= r0 or c1 <= c0:
        with pytest.raises(ParameterError, match="do not overlap"):  # touching an edge is no overlap
            read_dem(path, bounds=box)
        return
    if r1 - r0 < 3 or c1 - c0 < 3:
        with pytest.raises(GridError, match="at least 3 x 3"):  # fewer than 3 x 3 cells is refused
            read_dem(path, bounds=box)
        return
    dem = read_dem(path, bounds=box)
    np.testing.assert_array_equal(dem.elevation, z[r0:r1, c0:c1])
    assert dem.transform.almost_equals(T30 @ Affine.translation(c0, r0))


def test_bounds_read_only_the_window(write_geotiff, tmp_path: Path) -> None:
    # Tiles past the middle of this file are cut off: a full read fails, a read of a
    # window in the first tiles cannot touch them and succeeds (GDAL reads per tile).
    z = _terrain(64, 64)
    path = write_geotiff("tiled.tif", z, crs=UTM, transform=T30, tiled=True, blockxsize=16, blockysize=16)
    data = path.read_bytes()
    cut = tmp_path / "cut.tif"
    cut.write_bytes(data[: len(data) // 2])
    with pytest.raises(DemReadError, match=r"cannot read band 1 of DEM '.*cut\.tif'"):
        read_dem(cut)
    box = (T30.c, T30.f - 10 * 30, T30.c + 20 * 30, T30.f)
    dem = read_dem(cut, bounds=box)
    np.testing.assert_array_equal(dem.elevation, z[:10, :20])


def test_bounds_outside_the_dem(write_geotiff) -> None:
    path = write_geotiff("o.tif", _terrain(), crs=UTM, transform=T30)
    with pytest.raises(ParameterError, match=r"do not overlap DEM '.*o\.tif', whose bounds are \(400000, 5699400, 400900, 5700000\)"):
        read_dem(path, bounds=(-3.0, 50.0, -2.0, 51.0))  # lon/lat given for a UTM DEM


@pytest.mark.parametrize("bad", [(1, 2, 3), (5, 0, 1, 1), (0, 5, 1, 1), (0, 0, float("nan"), 1), "abcd", 7])
def test_malformed_bounds(write_geotiff, bad) -> None:
    path = write_geotiff("m.tif", _terrain(), crs=UTM, transform=T30)
    with pytest.raises(ParameterError, match=r"bounds must be 4 finite numbers \(left, bottom, right, top\).*got"):
        read_dem(path, bounds=bad)


# ------------------------------------------------------------------ missing values
def test_file_nodata_and_its_override(write_geotiff) -> None:
    z = _terrain()
    z[2, 3] = -9999.0
    z[4, 5] = 123.0
    path = write_geotiff("nd.tif", z, crs=UTM, transform=T30, nodata=-9999.0)
    dem = read_dem(path)
    assert not dem.valid[2, 3] and np.isnan(dem.elevation[2, 3]) and dem.valid[4, 5]
    assert dem.nodata == -9999.0
    # -9999 m lies inside the plausible range, so with the override it counts as terrain.
    other = read_dem(path, nodata=123.0)
    assert not other.valid[4, 5] and other.valid[2, 3] and other.elevation[2, 3] == -9999.0


def test_nan_cells_are_invalid(write_geotiff) -> None:
    z = _terrain()
    z[1, 1] = np.nan
    dem = read_dem(write_geotiff("nan.tif", z, crs=UTM, transform=T30))
    assert not dem.valid[1, 1] and dem.n_valid == z.size - 1


@pytest.mark.parametrize("unit", ["m", "ft"])
def test_int16_voids_are_invalid_even_with_another_nodata(write_geotiff, unit: str) -> None:
    # -32768 is the SRTM void value (common practice). In feet it would be -9988 m,
    # inside the plausible range, so it must be caught as a void, not as an absurd value.
    z = _terrain().astype(np.int16)
    z[0, 0] = -32768
    z[5, 5] = -9999
    plain = read_dem(write_geotiff("v1.tif", z, crs=UTM, transform=T30), vertical_unit=unit)
    assert not plain.valid[0, 0] and plain.valid[5, 5]  # -9999 is plausible when not declared nodata
    with_nodata = read_dem(write_geotiff("v2.tif", z, crs=UTM, transform=T30, nodata=-9999), vertical_unit=unit)
    assert not with_nodata.valid[0, 0] and not with_nodata.valid[5, 5]
    assert with_nodata.n_valid == z.size - 2


def test_internal_mask_marks_cells_invalid(tmp_path: Path) -> None:
    # A GDAL per-dataset mask (written with rasterio's write_mask) instead of a nodata value.
    z = _terrain()
    mask = np.full(z.shape, 255, np.uint8)
    mask[3:5, 6:9] = 0
    path = tmp_path / "masked.tif"
    with rasterio.Env(GDAL_TIFF_INTERNAL_MASK=True):
        with rasterio.open(path, "w", driver="GTiff", width=30, height=20, count=1, dtype="float32", crs=UTM, transform=T30) as dst:
            dst.write(z, 1)
            dst.write_mask(mask)
    dem = read_dem(path)
    np.testing.assert_array_equal(dem.valid, mask == 255)


# ------------------------------------------------------------------ bands
def test_multiband_needs_a_band(write_geotiff) -> None:
    stack = np.stack([_terrain(), _terrain() + 1000, _terrain() + 2000])
    path = write_geotiff("rgb.tif", stack, crs=UTM, transform=T30)
    with pytest.raises(BandError, match=r"DEM '.*rgb\.tif' has 3 bands; choose the elevation band with band=N.*1 to 3"):
        read_dem(path)
    np.testing.assert_array_equal(read_dem(path, band=2).elevation, stack[1])  # rasterio-written band 2
    with pytest.raises(BandError, match=r"band 4 does not exist in DEM '.*rgb\.tif', which has 3 band\(s\) numbered 1 to 3"):
        read_dem(path, band=4)
    with pytest.raises(BandError, match=r"band 0 does not exist"):
        read_dem(path, band=0)
    with pytest.raises(BandError, match=r"band must be an integer from 1 to 3.*got '2'"):
        read_dem(path, band="2")


# ------------------------------------------------------------------ georeference errors
def test_rotated_file_is_a_grid_error(write_geotiff) -> None:
    rotated = Affine.translation(400000, 5_700_000) @ Affine.rotation(15) @ Affine.scale(30, -30)
    path = write_geotiff("rot.tif", _terrain(), crs=UTM, transform=rotated)
    with pytest.raises(GridError, match=r"DEM '.*rot\.tif' has a rotated or sheared geotransform.*gdalwarp"):
        read_dem(path)


def test_no_crs_needs_a_cell_size(write_geotiff) -> None:
    z = _terrain()
    path = write_geotiff("nocrs.tif", z, transform=T30)
    with pytest.raises(CrsError, match=r"DEM '.*nocrs\.tif' has no CRS.*give the cell size in metres"):
        read_dem(path)
    dem = read_dem(path, cell_size=2.0)
    assert dem.crs is None and dem.cell_size_m == (2.0, 2.0)
    assert dem.transform == T30  # the file's own geotransform is kept


def test_plain_image_is_not_georeferenced(write_geotiff) -> None:
    z = _terrain()
    path = write_geotiff("plain.tif", z)  # rasterio writes the identity transform
    with pytest.raises(CrsError, match=r"DEM '.*plain\.tif' has no georeference.*give the cell size"):
        read_dem(path)
    dem = read_dem(path, cell_size=5.0)
    # The image's first row is its top row: nothing is flipped.
    np.testing.assert_array_equal(dem.elevation, z)
    assert dem.transform == Affine(5.0, 0, 0, 0, -5.0, 20 * 5.0)
    # Bounds in that local metric frame read the matching block.
    part = read_dem(path, cell_size=5.0, bounds=(10.0, 50.0, 40.0, 90.0))
    np.testing.assert_array_equal(part.elevation, z[2:10, 2:8])


def test_identity_transform_with_a_crs_is_still_not_georeferenced(write_geotiff) -> None:
    # Unit cells with row 0 at latitude 0 going north are an image without a geotransform.
    path = write_geotiff("idcrs.tif", _terrain(), crs="EPSG:4326")
    with pytest.raises(CrsError, match="no georeference"):
        read_dem(path)


# ------------------------------------------------------------------ unreadable files
def test_missing_file(tmp_path: Path) -> None:
    with pytest.raises(DemReadError, match=r"cannot open DEM '.*nowhere\.tif': no such file"):
        read_dem(tmp_path / "nowhere.tif")


def test_directory(tmp_path: Path) -> None:
    with pytest.raises(DemReadError, match="is a directory"):
        read_dem(tmp_path)


def test_text_file(tmp_path: Path) -> None:
    path = tmp_path / "notes.tif"
    path.write_text("Field notes: the ridge was walked on Tuesday.\n")
    with pytest.raises(DemReadError, match=r"cannot open DEM '.*notes\.tif': not recognized as .*supported file format; expected a raster"):
        read_dem(path)
    # A CSV is tried by GDAL's XYZ driver and fails with its own reason; still one clear error.
    table = tmp_path / "table.csv"
    table.write_text("elevation,x,y\n1,2,3\n")
    with pytest.raises(DemReadError, match=r"cannot open DEM '.*table\.csv': .+; expected a raster file such as a GeoTIFF"):
        read_dem(table)


def test_truncated_header(write_geotiff, tmp_path: Path) -> None:
    data = write_geotiff("ok.tif", _terrain(), crs=UTM, transform=T30).read_bytes()
    path = tmp_path / "stub.tif"
    path.write_bytes(data[:100])
    with pytest.raises(DemReadError, match=r"cannot open DEM '.*stub\.tif': .*TIFF"):
        read_dem(path)


def test_truncated_data(write_geotiff, tmp_path: Path) -> None:
    z = np.random.default_rng(1).random((300, 300), dtype=np.float32)
    data = write_geotiff("big.tif", z, crs=UTM, transform=T30, compress="deflate").read_bytes()
    path = tmp_path / "half.tif"
    path.write_bytes(data[: len(data) // 2])
    with pytest.raises(DemReadError, match=r"cannot read band 1 of DEM '.*half\.tif': .*failed"):
        read_dem(path)
    with pytest.raises(OSError):  # DemReadError is also an OSError, for callers catching that
        read_dem(path)


def test_all_nodata_names_the_file(write_geotiff) -> None:
    path = write_geotiff("void.tif", np.full((5, 5), -9999.0, np.float32), crs=UTM, transform=T30, nodata=-9999.0)
    with pytest.raises(GridError, match=r"DEM '.*void\.tif': the DEM has 0 valid cell\(s\)"):
        read_dem(path)


def test_complex_band_is_refused(write_geotiff) -> None:
    path = write_geotiff("cplx.tif", np.ones((5, 5), np.complex64), crs=UTM, transform=T30)
    with pytest.raises(InputError, match=r"band 1 of DEM '.*cplx\.tif' holds complex64 values"):
        read_dem(path)


# ------------------------------------------------------------------ options
@pytest.mark.parametrize("unit", ["yd", "M", "feet", 1])
def test_bad_vertical_unit(write_geotiff, unit) -> None:
    path = write_geotiff("u.tif", _terrain(), crs=UTM, transform=T30)
    with pytest.raises(ParameterError, match=r"vertical_unit .* is not accepted; use one of 'm', 'ft', 'us-ft'"):
        read_dem(path, vertical_unit=unit)


@pytest.mark.parametrize("bad", ["none", [1, 2], True])
def test_bad_nodata(write_geotiff, bad) -> None:
    path = write_geotiff("n.tif", _terrain(), crs=UTM, transform=T30)
    with pytest.raises(ParameterError, match="nodata must be a number; got"):
        read_dem(path, nodata=bad)


@pytest.mark.parametrize("bad", [0.0, -3.0, float("inf"), "ten"])
def test_bad_cell_size(write_geotiff, bad) -> None:
    path = write_geotiff("c.tif", _terrain())
    with pytest.raises(GridError, match="cell_size must be"):
        read_dem(path, cell_size=bad)


# ------------------------------------------------------------------ the shipped demo DEM
DEMO = Path(__file__).resolve().parents[2] / "demo"


def test_demo_uplands_reads_as_a_small_projected_dem() -> None:
    path = DEMO / "uplands.tif"
    assert path.stat().st_size < 400 * 1024  # the demo must stay small (project brief)
    dem = read_dem(path)
    with rasterio.open(path) as src:  # the reference: what rasterio itself reads from the file
        assert dem.shape == (src.height, src.width)
        assert dem.cell_size_m == src.res  # a projected CRS in metres: cell sizes are the resolution
        assert dem.crs == src.crs and dem.transform == src.transform
        assert src.compression is not None  # stored compressed
        np.testing.assert_array_equal(dem.elevation, src.read(1))
    assert dem.shape[0] <= 200 and dem.shape[1] <= 300  # small enough for a quick demo (project brief)
    # float64 as stored (demo/make_demo_dem.py: the model grids' type, so a first run compiles one type)
    assert not dem.geographic and dem.elevation.dtype == np.float64 and dem.valid.all()


def test_demo_generator_rewrites_the_same_grid(tmp_path: Path) -> None:
    import importlib.util

    spec = importlib.util.spec_from_file_location("make_demo_dem", DEMO / "make_demo_dem.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    out = module.write_uplands(tmp_path / "again.tif")
    fresh, shipped = read_dem(out), read_dem(DEMO / "uplands.tif")
    # Elevations are rounded to centimetres; allow one step for libm differences across platforms.
    np.testing.assert_allclose(fresh.elevation, shipped.elevation, rtol=0, atol=0.0101)
    assert fresh.transform == shipped.transform and fresh.crs == shipped.crs
    # The story of demo/README.md: a ridge between two basins, whose crest stays well inside
    # every row, and the River Tallow (west edge) below the Quern Water (east edge) after its fall.
    z = shipped.elevation
    crest = z.argmax(axis=1)
    cols = z.shape[1]
    assert np.all((crest > cols // 4) & (crest < 3 * cols // 4))
    assert np.all(z[:, 0] < z[:, -1])
    assert np.all(z.max(axis=1) - z[:, -1] > 100)  # real relief on the gentler side too
