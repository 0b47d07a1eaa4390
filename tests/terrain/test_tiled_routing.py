"""Tiled filling, D8 and drainage area equal the in-memory path, whatever the tiles cut.

References: the in-memory ``route`` (itself checked against scikit-image and networkx in
test_routing.py) and, for filling, scikit-image's morphological reconstruction by erosion
(Soille 2004, the classic definition of depression filling). Random DEMs with few
elevation levels are mostly depressions and flats, and random tile sizes cut through them.
"""

from __future__ import annotations

import numpy as np
import pytest
import rasterio
from affine import Affine
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from skimage.morphology import reconstruction

from divides import Dem, route
from divides.errors import DividesError
from divides.io.tiles import ScratchTiles
from divides.terrain.tiled_fill import fill_depressions_tiled
from divides.terrain.tiled_routing import ArraySource, route_raster_tiled, route_tiled


@st.composite
def cases(draw):
    rows, cols = draw(st.integers(3, 40)), draw(st.integers(3, 40))
    seed = draw(st.integers(0, 2**31 - 1))
    rng = np.random.default_rng(seed)
    z = rng.integers(0, draw(st.integers(1, 6)), size=(rows, cols)).astype(np.float32) * 10.0
    if draw(st.booleans()):
        z += rng.random((rows, cols)).astype(np.float32) * 25.0
    if draw(st.booleans()):
        z[rng.random((rows, cols)) < 0.08] = np.nan
    closed = draw(st.sampled_from([(), ("north",), ("east", "west"), ("north", "south", "east")]))
    tile = (draw(st.integers(2, 16)), draw(st.integers(2, 16)))
    geographic = draw(st.booleans())
    return z, closed, tile, geographic


def _dem(z, geographic):
    if geographic:  # per-row cell areas (not whole m²): sums in another order may differ in the last bit
        return Dem.from_array(z, transform=Affine(0.001, 0, 7.0, 0, -0.001, 46.0), crs="EPSG:4326")
    return Dem.from_array(z, cell_size=30.0)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(cases())
def test_tiles_equal_the_whole_grid(case):
    z, closed, tile, geographic = case
    try:
        dem = _dem(z, geographic)
        flow = route(dem, closed_edges=closed)
    except DividesError:
        return
    tiled = route_tiled(ArraySource(dem), tile_shape=tile, closed_edges=closed)
    assert np.array_equal(tiled.assemble("filled"), flow.conditioned.surface, equal_nan=True)
    assert np.array_equal(tiled.assemble("code").ravel(), flow.direction)
    area = tiled.assemble("area")
    if geographic:
        np.testing.assert_allclose(area, flow.area, rtol=1e-12, atol=0)
    else:
        assert np.array_equal(area, flow.area)  # 900 m² cells: every sum is exact


def test_a_lake_cut_by_four_tiles_and_a_crossing_flat():
    # A closed basin (rim 10 m, floor 0 m) on a 1 m plain, centred on the corner of four
    # 8 x 8 tiles: filling makes an 8 x 8 flat lake cut by both seams, spilling through one
    # notch of the rim at 5 m.
    z = np.full((16, 16), 1.0, dtype=np.float32)
    z[3:13, 3:13] = 10.0
    z[4:12, 4:12] = 0.0
    z[7, 3] = 5.0
    dem = Dem.from_array(z, cell_size=10.0)
    flow = route(dem)
    tiled = route_tiled(ArraySource(dem), tile_shape=(8, 8))
    filled = tiled.assemble("filled")
    assert np.all(filled[4:12, 4:12] == 5.0)  # the spill level of the notch (by construction)
    assert tiled.n_crossing_flats >= 1
    assert np.array_equal(tiled.assemble("code").ravel(), flow.direction)
    assert np.array_equal(tiled.assemble("area"), flow.area)


@settings(max_examples=25, deadline=None)
@given(st.integers(0, 2**31 - 1), st.integers(1, 12), st.integers(2, 3))
def test_strip_filling_equals_reconstruction_by_erosion(seed, strip, threads):
    # Depression filling = morphological reconstruction by erosion of a marker equal to the DEM
    # on its border and to the maximum inside (Soille 2004, ch. 6); scikit-image computes it.
    rng = np.random.default_rng(seed)
    z = rng.random((int(rng.integers(3, 30)), int(rng.integers(3, 30)))).astype(np.float32) * 100
    marker = np.full_like(z, z.max())
    marker[[0, -1], :] = z[[0, -1], :]
    marker[:, [0, -1]] = z[:, [0, -1]]
    expected = reconstruction(marker, z, method="erosion")
    edge = np.zeros(z.shape, dtype=bool)
    edge[[0, -1], :] = edge[:, [0, -1]] = True
    filled, n = fill_depressions_tiled(z, np.ones(z.shape, dtype=bool), edge, tile_rows=strip, threads=threads)
    assert np.array_equal(filled, expected.astype(np.float32))
    assert n == int(np.count_nonzero(expected > z))


def test_a_geotiff_on_a_local_cluster_of_two_workers(tmp_path):
    # rasterio writes the DEM and reads the outputs back; a LocalCluster with two (thread)
    # workers runs the tiles; the scratch folder is emptied afterwards.
    rng = np.random.default_rng(7)
    z = (np.add.outer(np.arange(40.0), np.arange(36.0)) + rng.integers(0, 4, (40, 36)) * 3.0).astype(np.float32)
    z[5:9, 20:26] = 1.0  # a pit across the seam of two tiles
    transform = Affine(30.0, 0, 500000.0, 0, -30.0, 4_000_000.0)
    src = tmp_path / "dem.tif"
    with rasterio.open(src, "w", driver="GTiff", width=36, height=40, count=1, dtype="float32",
                       crs="EPSG:32632", transform=transform) as dst:
        dst.write(z, 1)
    scratch = tmp_path / "scratch"
    written = route_raster_tiled(src, tmp_path / "out", tile=16, workers=2, processes=False, scratch=scratch)
    assert written["tiles"] == 9
    dem = Dem.from_array(z, transform=transform, crs="EPSG:32632")
    flow = route(dem)
    with rasterio.open(written["filled.tif"]) as f, rasterio.open(written["d8.tif"]) as d, \
            rasterio.open(written["area.tif"]) as a:
        assert f.crs == dem.crs and f.transform == transform
        assert np.array_equal(f.read(1), flow.conditioned.surface)
        assert np.array_equal(d.read(1).ravel(), flow.direction)
        assert np.array_equal(a.read(1), flow.area)
    assert list(scratch.iterdir()) == []  # intermediate tiles removed


def test_scratch_tiles_round_trip(tmp_path):
    store = ScratchTiles(tmp_path)
    block = np.arange(12, dtype=np.float32).reshape(3, 4)
    store.put("filled", (1, 2), block)
    assert np.array_equal(store.get("filled", (1, 2)), block)
    store.close()
    assert list(tmp_path.iterdir()) == []
    (tmp_path / "file.txt").write_text("x")
    with pytest.raises(DividesError, match="scratch folder"):
        ScratchTiles(tmp_path / "file.txt" / "sub")  # a file where a folder should be
