"""The commands' tiled path: a flow graph routed by tiles equals the in-memory one.

Reference: the in-memory ``route`` (itself checked against scikit-image's reconstruction and
networkx in test_routing.py). Random DEMs of few elevation levels are mostly depressions and
flats, so 16-cell tiles cut through both.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from divides import Dem, route
from divides.errors import DividesError, ParameterError
from divides.terrain.tiled_flow import TiledPlan, route_by_tiles, tiled_routing


@st.composite
def dems(draw):
    rows, cols = draw(st.integers(3, 60)), draw(st.integers(3, 60))
    rng = np.random.default_rng(draw(st.integers(0, 2**31 - 1)))
    z = rng.integers(0, draw(st.integers(1, 6)), size=(rows, cols)).astype(np.float32) * 10.0
    if draw(st.booleans()):
        z += rng.random((rows, cols)).astype(np.float32) * 25.0
    if draw(st.booleans()):
        z[rng.random((rows, cols)) < 0.08] = np.nan
    closed = draw(st.sampled_from([(), ("north",), ("east", "west")]))
    return z, closed


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(dems())
def test_flow_by_tiles_equals_in_memory(case):
    z, closed = case
    try:
        dem = Dem.from_array(z, cell_size=30.0)  # whole m² cells: areas equal bit for bit
        ref = route(dem, closed_edges=closed)
    except DividesError:
        return
    got = route_by_tiles(dem, TiledPlan(tile=16, workers=2), closed_edges=closed)
    assert np.array_equal(got.conditioned.surface, ref.conditioned.surface, equal_nan=True)
    assert np.array_equal(got.conditioned.outlets, ref.conditioned.outlets)
    assert got.conditioned.filled_cells == ref.conditioned.filled_cells
    assert got.conditioned.filled_volume_m3 == pytest.approx(ref.conditioned.filled_volume_m3, rel=1e-12)
    assert np.array_equal(got.direction, ref.direction)
    assert np.array_equal(got.receivers, ref.receivers)
    assert np.array_equal(got.order, ref.order)
    assert np.array_equal(got.area, ref.area)
    assert got.n_flat_cells == ref.n_flat_cells


def test_route_takes_the_tiled_path_inside_the_block(tmp_path):
    rng = np.random.default_rng(3)
    dem = Dem.from_array((rng.random((40, 50)) * 100).astype(np.float32), cell_size=10.0)
    with tiled_routing(TiledPlan(tile=16, scratch=str(tmp_path))):
        tiled = route(dem)
        with pytest.raises(ParameterError, match="filling only"):
            route(dem, conditioning="breach")
    assert np.array_equal(tiled.area, route(dem).area)
    assert list(tmp_path.iterdir()) == []  # scratch tiles removed


def test_flow_by_tiles_on_a_local_cluster_of_two_workers_equals_in_memory(tmp_path):
    # The tiles as tasks of a Dask cluster found by its address (two worker processes: the DEM
    # travels to them once, the tiles through the scratch folder); the reference is in-memory routing.
    from divides.terrain.cluster import cluster_client

    rng = np.random.default_rng(11)
    z = (rng.integers(0, 4, size=(70, 90)) * 10.0 + rng.random((70, 90)) * 5.0).astype(np.float32)
    z[rng.random(z.shape) < 0.05] = np.nan
    dem = Dem.from_array(z, cell_size=30.0)
    ref = route(dem, closed_edges=("north",))
    with cluster_client(workers=2, processes=True) as client:
        address = client.scheduler.address
        assert len(client.scheduler_info()["workers"]) == 2
        with tiled_routing(TiledPlan(tile=16, scratch=str(tmp_path), scheduler=address)):
            got = route(dem, closed_edges=("north",))
    assert np.array_equal(got.conditioned.surface, ref.conditioned.surface, equal_nan=True)
    assert np.array_equal(got.direction, ref.direction)
    assert np.array_equal(got.order, ref.order)
    assert np.array_equal(got.area, ref.area)
    assert not list(tmp_path.iterdir())  # the scratch tiles are removed
