"""Dem.from_array: georeference, metric cell sizes, masks and coordinates.

References: rasterio's transform helpers, pyproj (units, transformations,
geodesics), NIST SP 811 for the foot definitions.
"""

from __future__ import annotations

import numpy as np
import pyproj
import pytest
import rasterio.transform
from affine import Affine
from hypothesis import given, settings
from hypothesis import strategies as st

from divides.errors import CrsError, GridError, InputError
from divides.io.dem import Dem

US_SURVEY_FOOT = 1200.0 / 3937.0  # NIST SP 811 (2008), B.8: exactly 1200/3937 m
FOOT = 0.3048  # international foot, exact by the 1959 agreement (NIST SP 811)

# dem.py flips south-up/east-to-west grids with Affine `*`, which affine 3.0 deprecates in
# favour of `@` (PendingDeprecationWarning, an error in this test run). Drop this filter
# once dem.py composes transforms with `@`.

HYPOTHESIS = settings(max_examples=60, deadline=None, database=None)


def _ramp(rows: int = 5, cols: int = 6, dtype=np.float32) -> np.ndarray:
    return np.arange(rows * cols, dtype=dtype).reshape(rows, cols) + 100


# ------------------------------------------------------------------ cell sizes
def test_cell_size_only_builds_a_north_up_local_grid() -> None:
    dem = Dem.from_array(_ramp(), cell_size=(30.0, 20.0))
    assert dem.crs is None and not dem.geographic
    assert np.all(dem.dx == 30.0) and np.all(dem.dy == 20.0) and np.all(dem.cell_area == 600.0)
    # Upper-left corner at (0, rows * dy) with y growing north (documented convention).
    assert dem.transform == Affine(30.0, 0, 0, 0, -20.0, 100.0)
    # rasterio's array_bounds of the same grid; its (west, south, east, north) is our order too.
    assert dem.bounds == pytest.approx(rasterio.transform.array_bounds(5, 6, dem.transform))


def test_projected_metres() -> None:
    t = Affine(25.0, 0, 500000.0, 0, -25.0, 6200000.0)
    dem = Dem.from_array(_ramp(), transform=t, crs="EPSG:32630")
    assert dem.cell_size_m == (25.0, 25.0)
    assert np.allclose(dem.cell_area, 625.0)
    west, south, east, north = rasterio.transform.array_bounds(5, 6, t)  # rasterio: (w, s, e, n)
    assert dem.bounds == pytest.approx((west, south, east, north))


@pytest.mark.parametrize(
    ("epsg", "foot"),
    [(2229, US_SURVEY_FOOT), (2223, FOOT)],  # NAD83 / California 5 (ftUS); NAD83 / Arizona Central (ft)
)
def test_projected_feet_cell_size_in_metres(epsg: int, foot: float) -> None:
    # pyproj says which foot the CRS uses; NIST says how long it is.
    assert pyproj.CRS.from_epsg(epsg).axis_info[0].unit_conversion_factor == pytest.approx(foot, rel=1e-15)
    t = Affine(100.0, 0, 6_000_000.0, 0, -100.0, 2_000_000.0)
    dem = Dem.from_array(_ramp(), transform=t, crs=f"EPSG:{epsg}")
    assert np.allclose(dem.dx, 100 * foot, rtol=1e-12)
    assert np.allclose(dem.dy, 100 * foot, rtol=1e-12)
    assert np.allclose(dem.cell_area, (100 * foot) ** 2, rtol=1e-12)


def test_vertical_scale_converts_elevations_to_metres() -> None:
    z = _ramp()
    dem = Dem.from_array(z, cell_size=10.0, vertical_scale=US_SURVEY_FOOT, vertical_unit="us-ft")
    assert np.allclose(dem.elevation, z * US_SURVEY_FOOT, rtol=1e-6)  # float32 precision
    assert dem.vertical_unit == "us-ft"


@pytest.mark.parametrize(("epsg", "ellps"), [(4326, "WGS84"), (4269, "GRS80"), (4258, "GRS80"), (4267, "clrk66")])
def test_geographic_rows_use_the_crs_ellipsoid(epsg: int, ellps: str) -> None:
    size = 1 / 1200  # 3 arc-seconds
    t = Affine(size, 0, -100.0, 0, -size, 50.0)
    dem = Dem.from_array(_ramp(4, 5), transform=t, crs=f"EPSG:{epsg}")
    assert dem.geographic
    geod = pyproj.Geod(ellps=ellps)  # pyproj ellipsoid of the same datum
    assert dem.ellipsoid.a == pytest.approx(geod.a)
    for row in range(4):
        top = 50.0 - row * size
        _, _, height = geod.inv(-100.0, top - size, -100.0, top)  # pyproj meridian arc
        assert dem.dy[row] == pytest.approx(height, rel=1e-9)
        _, _, width = geod.inv(-100.0, top - size / 2, -100.0 + size, top - size / 2)  # pyproj geodesic
        assert dem.dx[row] == pytest.approx(width, rel=1e-6)
        corners = ([-100.0, -100.0 + size, -100.0 + size, -100.0], [top - size, top - size, top, top])
        area, _ = geod.polygon_area_perimeter(*corners)  # pyproj polygon area
        assert dem.cell_area[row] == pytest.approx(abs(area), rel=1e-6)
    # Cells shrink poleward (rows run north to south, so dx grows down the array).
    assert np.all(np.diff(dem.dx) > 0)


def test_matplotlib_jacksboro_dem_cell_sizes_against_pyproj() -> None:
    # A real SRTM-derived DEM shipped with matplotlib: 3 arc-second cells near 36.6 N.
    cbook = pytest.importorskip("matplotlib.cbook")
    data = cbook.get_sample_data("jacksboro_fault_dem.npz")
    z = data["elevation"]
    # 'ymin' is the northern edge in this file (36.73), 'ymax' the southern (36.446).
    t = Affine(float(data["dx"]), 0, float(data["xmin"]), 0, -float(data["dy"]), float(data["ymin"]))
    dem = Dem.from_array(z, transform=t, crs="EPSG:4326")
    assert dem.shape == (344, 403) and dem.n_valid == z.size
    assert dem.elevation.dtype == np.float32
    assert dem.bounds[1] == pytest.approx(float(data["ymax"]), abs=1e-9)  # southern edge from the file
    assert dem.bounds[2] == pytest.approx(float(data["xmax"]), abs=1e-9)
    geod = pyproj.Geod(ellps="WGS84")
    for row in (0, 171, 343):
        top = float(data["ymin"]) - row * float(data["dy"])
        bottom = top - float(data["dy"])
        lon0, lon1 = float(data["xmin"]), float(data["xmin"]) + float(data["dx"])
        assert dem.dy[row] == pytest.approx(geod.inv(lon0, bottom, lon0, top)[2], rel=1e-9)  # pyproj
        mid = (top + bottom) / 2
        assert dem.dx[row] == pytest.approx(geod.inv(lon0, mid, lon1, mid)[2], rel=1e-6)  # pyproj
        area, _ = geod.polygon_area_perimeter([lon0, lon1, lon1, lon0], [bottom, bottom, top, top])
        assert dem.cell_area[row] == pytest.approx(abs(area), rel=1e-6)  # pyproj
    # Sanity against a handbook figure: 3" at 36.6 N is about 74.4 m east-west and 92.4 m
    # north-south (111.32 km * cos(lat) / 1200 and ~110.9 km / 1200; from memory).
    assert dem.cell_size_m == pytest.approx((74.4, 92.4), abs=0.5)


# ------------------------------------------------------------------ masks
def test_nodata_nan_and_absurd_values_are_invalid() -> None:
    z = _ramp(5, 5)
    z[0, 0] = -9999.0
    z[1, 1] = np.nan
    z[2, 2] = -32768.0  # int16 void value, far below any real elevation (common practice)
    z[3, 3] = 1e30
    dem = Dem.from_array(z, cell_size=10.0, nodata=-9999.0)
    bad = [(0, 0), (1, 1), (2, 2), (3, 3)]
    for rc in bad:
        assert not dem.valid[rc] and np.isnan(dem.elevation[rc])
    assert dem.n_valid == 25 - len(bad)
    assert np.isfinite(dem.elevation[dem.valid]).all()


def test_float32_stays_float32_and_wide_types_become_float64() -> None:
    assert Dem.from_array(_ramp(dtype=np.float32), cell_size=1.0).elevation.dtype == np.float32
    assert Dem.from_array(_ramp(dtype=np.int16), cell_size=1.0).elevation.dtype == np.float32
    assert Dem.from_array(_ramp(dtype=np.float64), cell_size=1.0).elevation.dtype == np.float64


def test_input_array_is_not_modified() -> None:
    z = _ramp()
    z[0, 0] = np.nan
    before = z.copy()
    Dem.from_array(z, cell_size=1.0, vertical_scale=FOOT)
    np.testing.assert_array_equal(z, before)


# ------------------------------------------------------------------ orientation
def test_south_up_grid_is_flipped_to_north_up() -> None:
    z = _ramp()
    south_up = Affine(30.0, 0, 1000.0, 0, 30.0, 5000.0)  # row 0 is the southern row
    dem = Dem.from_array(z, transform=south_up, crs="EPSG:32630")
    np.testing.assert_array_equal(dem.elevation, z[::-1])
    assert dem.transform.e < 0
    # The same cells sit at the same places: compare with rasterio on the original grid.
    x, y = dem.xy(0, 2)
    assert (x, y) == pytest.approx(rasterio.transform.xy(south_up, 4, 2, offset="center"))


def test_east_to_west_grid_is_flipped() -> None:
    z = _ramp()
    mirrored = Affine(-30.0, 0, 1000.0, 0, -30.0, 5000.0)
    dem = Dem.from_array(z, transform=mirrored, crs="EPSG:32630")
    np.testing.assert_array_equal(dem.elevation, z[:, ::-1])
    x, y = dem.xy(1, 0)
    assert (x, y) == pytest.approx(rasterio.transform.xy(mirrored, 1, 5, offset="center"))  # rasterio


transforms = st.builds(
    lambda a, e, c, f, south_up: Affine(a, 0, c, 0, e if south_up else -e, f),
    st.floats(1e-4, 1e4),
    st.floats(1e-4, 1e4),
    st.floats(-1e7, 1e7),
    st.floats(-1e7, 1e7),
    st.booleans(),
)


@HYPOTHESIS
@given(t=transforms, rows=st.integers(3, 30), cols=st.integers(3, 30), data=st.data())
def test_rowcol_inverts_xy_and_agrees_with_rasterio(t: Affine, rows: int, cols: int, data) -> None:
    dem = Dem.from_array(np.zeros((rows, cols), np.float32), transform=t, crs="EPSG:3857")
    r = data.draw(st.integers(0, rows - 1), label="row")
    c = data.draw(st.integers(0, cols - 1), label="col")
    x, y = dem.xy(r, c)
    assert tuple(int(v) for v in dem.rowcol(x, y)) == (r, c)  # common practice: round trip
    # rasterio on the original (possibly south-up) transform places the same cell there.
    source_row = rows - 1 - r if t.e > 0 else r
    xr, yr = rasterio.transform.xy(t, source_row, c, offset="center")
    span = max(abs(t.c), abs(t.f), 1.0)
    assert x == pytest.approx(xr, abs=1e-9 * span) and y == pytest.approx(yr, abs=1e-9 * span)
    # Any point well inside the cell maps back to it, as rasterio.transform.rowcol says.
    fx = data.draw(st.floats(0.02, 0.98), label="fx")
    fy = data.draw(st.floats(0.02, 0.98), label="fy")
    px, py = t @ (c + fx, source_row + fy)
    rr, cc = rasterio.transform.rowcol(t, px, py)
    assert (int(cc), rows - 1 - int(rr) if t.e > 0 else int(rr)) == (c, r)
    assert tuple(int(v) for v in dem.rowcol(px, py)) == (r, c)


def test_lonlat_round_trip_agrees_with_pyproj() -> None:
    t = Affine(30.0, 0, 400000.0, 0, -30.0, 5_700_000.0)
    dem = Dem.from_array(_ramp(), transform=t, crs="EPSG:32630")
    x, y = dem.xy([0, 4], [0, 5])
    lon, lat = dem.to_lonlat(x, y)
    to_geo = pyproj.Transformer.from_crs("EPSG:32630", "EPSG:4326", always_xy=True)  # pyproj
    ref_lon, ref_lat = to_geo.transform(x, y)
    np.testing.assert_allclose(lon, ref_lon, atol=1e-9)
    np.testing.assert_allclose(lat, ref_lat, atol=1e-9)
    back_x, back_y = dem.from_lonlat(lon, lat)
    np.testing.assert_allclose(back_x, x, atol=1e-4)
    np.testing.assert_allclose(back_y, y, atol=1e-4)


def test_describe_is_json_ready() -> None:
    import json

    dem = Dem.from_array(_ramp(), transform=Affine(30.0, 0, 0, 0, -30.0, 150.0), crs="EPSG:32630")
    described = json.loads(json.dumps(dem.describe()))  # stdlib json accepts it
    assert described["crs"] == "EPSG:32630" and described["shape"] == [5, 6]
    assert described["elevation_m"] == [100.0, 129.0]


# ------------------------------------------------------------------ errors
def test_rotated_transform_is_a_grid_error() -> None:
    rotated = Affine.translation(1000, 5000) @ Affine.rotation(10) @ Affine.scale(30, -30)
    with pytest.raises(GridError, match=r"rotated or sheared.*warp"):
        Dem.from_array(_ramp(), transform=rotated, crs="EPSG:32630")


def test_too_small_or_too_empty_is_a_grid_error() -> None:
    with pytest.raises(GridError, match=r"2 x 5 cells; at least 3 x 3"):
        Dem.from_array(np.zeros((2, 5)), cell_size=1.0)
    with pytest.raises(GridError, match=r"8 valid cell\(s\).*nodata"):
        z = np.full((4, 4), np.nan)
        z[:2, :] = 1.0
        Dem.from_array(z, cell_size=1.0)


def test_not_two_dimensional_or_not_numeric() -> None:
    with pytest.raises(GridError, match="2-D array.*3 dimension"):
        Dem.from_array(np.zeros((2, 3, 3)), cell_size=1.0)
    with pytest.raises(InputError, match="numeric.*<U1"):
        Dem.from_array(np.full((3, 3), "a"), cell_size=1.0)


def test_missing_or_unknown_crs() -> None:
    with pytest.raises(CrsError, match="cell size in metres"):
        Dem.from_array(_ramp())
    with pytest.raises(CrsError, match="cell size in metres"):
        Dem.from_array(_ramp(), transform=Affine(30.0, 0, 0, 0, -30.0, 0))
    with pytest.raises(CrsError, match=r"'EPSG:999999'.*EPSG code"):
        Dem.from_array(_ramp(), transform=Affine(30.0, 0, 0, 0, -30.0, 0), crs="EPSG:999999")


def test_bad_cell_size_is_a_grid_error() -> None:
    with pytest.raises(GridError, match=r"cell_size must be positive metres; got -5"):
        Dem.from_array(_ramp(), cell_size=-5.0)


def test_geographic_grid_beyond_the_pole_is_a_crs_error() -> None:
    # Someone gave a projected transform (metres) with a geographic CRS.
    t = Affine(30.0, 0, 500000.0, 0, -30.0, 6_200_000.0)
    with pytest.raises(CrsError, match=r"geographic.*latitude.*wrong"):
        Dem.from_array(_ramp(), transform=t, crs="EPSG:4326")
