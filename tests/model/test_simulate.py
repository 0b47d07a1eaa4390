"""The simulate driver: mass balance, symmetry, boundary conditions, snapshots and errors."""

from __future__ import annotations

import numpy as np
import pytest

from divides import Dem, route
from divides.errors import ParameterError
from divides.model import closed_edge, open_edge, simulate
from divides.model.scenarios import ridge_surface

ACTIVE, FIXED, WALL, INVALID = 0, 1, 2, 3


def test_mass_balance_per_step_with_every_process():
    # Conservation (common practice): per step, uplift in - erosion out - diffusion out =
    # storage change. Uplift is recomputed here from the fields, storage from the snapshots,
    # so the budget closes only if the solvers conserve what they claim to move.
    rng = np.random.default_rng(8)
    shape, cell = (30, 40), (50.0, 60.0)
    z0 = np.add.outer(np.linspace(40, 0, shape[0]), np.zeros(shape[1])) + 10 * rng.random(shape)
    uplift = 1e-3 * (0.5 + rng.random(shape))
    erodibility = 1e-6 * (0.5 + rng.random(shape))
    runoff = 0.5 + rng.random(shape)
    dt, steps = 2000.0, 8
    edges = {"north": "closed", "east": open_edge(lowering_rate=1e-3), "south": 0.0}
    result = simulate(
        z0, cell_size=cell, duration=dt * steps, dt=dt, uplift=uplift, erodibility=erodibility, m=0.6, n=1.5,
        diffusivity=0.5, runoff=runoff, edges=edges, snapshot_times=np.arange(steps + 1) * dt,
    )
    active = result.cell_kind == ACTIVE
    area = cell[0] * cell[1]
    b = result.budget
    assert b.times.size == steps
    np.testing.assert_allclose(b.uplift_m3, np.sum(uplift[active]) * dt * area, rtol=1e-12)
    storage = [
        np.sum(result.snapshots[k + 1].elevation[active] - result.snapshots[k].elevation[active]) * area
        for k in range(steps)
    ]
    np.testing.assert_allclose(b.storage_m3, storage, rtol=1e-9)
    scale = b.uplift_m3 + b.eroded_m3 + np.abs(b.diffused_out_m3)
    assert np.all(np.abs(b.residual_m3) < 1e-10 * scale)
    assert np.all(b.eroded_m3 > 0) and np.all(b.diffused_out_m3 != 0)  # every term is exercised


@pytest.mark.parametrize("with_runoff", [False, True])
def test_fluvial_step_of_the_driver_solves_the_implicit_equation(with_runoff):
    # Braun & Willett 2013: one step of the driver (no diffusion) satisfies, cell by cell,
    # h - (h0 + U dt) + K A^m dt (max(h - h_r, 0) / L)^n = 0 on the routing of the start
    # surface, recomputed here with the project's route() (all edges open at their start);
    # with runoff, A is the runoff-weighted area (discharge proxy, Gelwick et al. 2024 use
    # the same substitution for chi), taken here from FlowGraph.weighted_area.
    rng = np.random.default_rng(9)
    z0 = np.add.outer(np.linspace(0, 30, 20), np.linspace(0, 20, 25)) + 15 * rng.random((20, 25))
    m, n, k, u, dt = 0.5, 1.0, 3e-5, 2e-3, 800.0
    runoff = 0.2 + 2 * rng.random(z0.shape) if with_runoff else None
    result = simulate(z0, cell_size=30.0, duration=dt, dt=dt, uplift=u, erodibility=k, m=m, n=n, runoff=runoff)
    flow = route(Dem.from_array(z0, cell_size=30.0))
    area = flow.weighted_area(runoff) if with_runoff else flow.area
    h, h0 = result.final.elevation.ravel(), z0.ravel()
    moving = np.flatnonzero(flow.receivers != np.arange(h.size))
    h_r = h[flow.receivers[moving]]
    coef = k * area.ravel()[moving] ** m * dt / flow.distance[moving] ** n
    residual = h[moving] - (h0[moving] + u * dt) + coef * np.clip(h[moving] - h_r, 0, None) ** n
    assert np.max(np.abs(residual)) < 1e-10 * np.abs(h0).max()
    np.testing.assert_array_equal(h[flow.outlets], h0[flow.outlets])  # outlets held at their start


def _mirrored_ridge(shape=(32, 64), seed=0):
    """A ridge whose noise is mirrored about the centre line: exactly symmetric west-east."""
    z = ridge_surface(shape, noise=0.0).elevation.astype(np.float64)
    half = shape[1] // 2
    noise = np.random.default_rng(seed).random((shape[0], half))
    noise[:, 0] = 0.0  # edge cells stay at base level
    z[:, :half] += noise
    z[:, half:] += noise[:, ::-1]
    np.testing.assert_array_equal(z, z[:, ::-1])
    return z


def test_symmetric_forcing_keeps_the_divide_in_place():
    # Symmetry (common practice): mirror-symmetric surface and forcing give no reason for the
    # divide to move; only D8 tie-breaking is asymmetric, so it stays within one cell.
    # Control: the same run with the east base level lowered 20 m moves it by many cells,
    # so the check can fail (Willett et al. 2014: the divide moves into the higher-chi side).
    z = _mirrored_ridge()
    options = dict(
        cell_size=100.0, duration=3e6, dt=2e4, uplift=1e-4, erodibility=2e-5, diffusivity=0.01,
        edges={"north": "closed", "south": "closed", "west": 0.0, "east": 0.0}, track=("west", "east"),
    )
    result = simulate(z, **options)
    mean = result.divide.mean
    centre = 64 * 100.0 / 2
    assert abs(mean[0] - centre) < 100.0
    assert np.max(np.abs(mean - mean[0])) < 100.0  # measured: 0 m
    options["edges"] = {**options["edges"], "east": -20.0}
    control = simulate(z, **options).divide.mean
    assert control[0] - control[-1] > 1000.0  # measured: 2230 m


def test_base_level_histories_reach_the_edge_cells():
    # Analytic integrals of the prescribed histories (from the definitions in open_edge):
    # table of elevations -> linear interpolation; table of rates -> piecewise-constant
    # integral; function of time -> its integral.
    z0 = np.full((12, 14), 50.0)
    z0[:, 0] = z0[:, -1] = 5.0
    z0[0, :] = z0[-1, :] = 8.0
    edges = {
        "west": open_edge(elevation=[(0.0, 5.0), (1e4, -5.0)]),
        "east": open_edge(lowering_rate=[(0.0, 1e-3), (5e3, 3e-3)]),
        "north": open_edge(lowering_rate=lambda t: 2e-3 * t / 1e4),
        "south": closed_edge(),
    }
    times = [0.0, 2.5e3, 7.5e3, 1e4]
    result = simulate(
        z0, cell_size=10.0, duration=1e4, dt=1e3, uplift=0.0, erodibility=1e-5, edges=edges, snapshot_times=times,
    )
    for t in times:
        z = result.snapshot(t).elevation
        west = 5.0 - 10.0 * t / 1e4
        east_drop = 1e-3 * min(t, 5e3) + 3e-3 * max(t - 5e3, 0.0)
        east = 5.0 - east_drop
        north = 8.0 - 1e-3 * t**2 / 1e4
        np.testing.assert_allclose(z[1:-1, 0], west, rtol=0, atol=1e-9)
        np.testing.assert_allclose(z[1:-1, -1], east, rtol=0, atol=1e-9)
        np.testing.assert_allclose(z[0, 1:-1], north, rtol=0, atol=1e-7)
        # corners of two open edges take the lower base level (lowering starts from the
        # corner's own elevation, 8 m); south is a wall
        assert z[0, 0] == pytest.approx(min(west, north), abs=1e-7)
        assert z[0, -1] == pytest.approx(min(8.0 - east_drop, north), abs=1e-7)
    assert np.all(result.cell_kind[-1] == WALL)
    assert np.all(result.cell_kind[0] == FIXED) and np.all(result.cell_kind[1:-1, 0] == FIXED)


def test_closed_edge_lets_nothing_out():
    # A plane tilted down to the north: with the north edge open water leaves there; closed,
    # everything must leave by the south edge, so under uplift the north side rises above
    # the south side (physical expectation, common practice).
    rows, cols = 24, 20
    z0 = np.add.outer(np.linspace(0.0, 30.0, rows), np.zeros(cols)) + np.random.default_rng(4).random((rows, cols))
    edges = {"north": "closed", "south": 30.0, "west": "closed", "east": "closed"}
    result = simulate(z0, cell_size=100.0, duration=2e6, dt=2e4, uplift=1e-4, erodibility=2e-5, diffusivity=0.01, edges=edges)
    z = result.final.elevation
    assert z[1, 1:-1].mean() > z[-2, 1:-1].mean() + 5.0
    # walls copy their nearest interior cell (zero gradient)
    np.testing.assert_array_equal(z[0, 1:-1], z[1, 1:-1])
    np.testing.assert_array_equal(z[1:-1, 0], z[1:-1, 1])
    # the open south edge is held at its base level
    np.testing.assert_array_equal(z[-1, 1:-1], 30.0)
    # the budget balances with all water and soil leaving through one edge
    assert np.all(np.abs(result.budget.residual_m3) < 1e-9 * result.budget.uplift_m3)


def test_dem_input_keeps_its_grid_and_holds_cells_beside_nodata():
    z0 = np.add.outer(np.linspace(0, 20, 15), np.linspace(0, 10, 18)) + 5.0
    z0[6:8, 8:10] = np.nan
    dem = Dem.from_array(z0, cell_size=25.0, crs="EPSG:32633")
    result = simulate(dem, duration=5e3, dt=1e3, uplift=1e-3, erodibility=1e-5)
    final = result.final
    assert final.transform == dem.transform and final.crs == dem.crs and final.shape == dem.shape
    assert np.array_equal(np.isnan(final.elevation), np.isnan(z0))
    ring = np.zeros(z0.shape, dtype=bool)  # the 8-neighbours of the nodata block
    ring[5:9, 7:11] = True
    ring &= np.isfinite(z0)
    assert np.all(result.cell_kind[ring] == FIXED)
    assert np.all(result.cell_kind[2:-2, 2:-2][~np.pad(ring, 0)[2:-2, 2:-2] & np.isfinite(z0[2:-2, 2:-2])] == ACTIVE)
    np.testing.assert_array_equal(final.elevation[ring], z0[ring])
    assert np.all(result.cell_kind[6:8, 8:10] == INVALID)
    assert np.all(np.isnan(dem.elevation[6:8, 8:10]))  # the input is not modified
    assert np.nanmax(np.abs(dem.elevation - z0)) == 0.0


def test_steps_land_on_snapshot_times_and_tracks_follow_the_interval():
    z0 = ridge_surface((10, 16), noise=1.0).elevation
    result = simulate(
        z0, cell_size=100.0, duration=1e4, dt=3e3, uplift=1e-4, erodibility=1e-5,
        edges={"north": "closed", "south": "closed"}, snapshot_times=[1e4, 0.0, 5e3],
        track=("east", "west"), track_interval=5e3,
    )
    np.testing.assert_array_equal(result.times, [0.0, 5e3, 1e4])
    assert result.n_steps == 4  # 5000 years in two steps of 2500, twice
    np.testing.assert_array_equal(result.budget.times, [2.5e3, 5e3, 7.5e3, 1e4])
    np.testing.assert_array_equal(result.divide.times, [0.0, 5e3, 1e4])
    assert result.divide.side_a == "east" and result.divide.positions.shape == (3, 10)
    assert np.all(np.isnan(result.divide.positions[:, [0, -1]]))  # wall rows are not counted
    start = result.snapshot(0.0).elevation
    np.testing.assert_array_equal(start[1:-1], z0[1:-1])
    np.testing.assert_array_equal(start[[0, -1], 1:-1], z0[[1, -2], 1:-1])  # walls copy their neighbours
    with pytest.raises(ParameterError, match="no snapshot at t = 7000"):
        result.snapshot(7000.0)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"edges": dict.fromkeys(("north", "south", "west", "east"), "closed")}, "every edge is closed"),
        ({"edges": {"up": "open"}}, r"unknown edge name\(s\) \['up'\]"),
        ({"edges": {"west": "shut"}}, "edge 'west': 'shut' is not an edge condition"),
        ({"edges": {"west": "closed"}, "track": ("west", "east")}, "`track` side 'west' is a closed edge"),
        ({"track": ("west", "north")}, "sides 'west' and 'north' are not opposite edges"),
        ({"snapshot_times": [-1.0]}, r"`snapshot_times` must lie within \[0, duration = 1000\] years; got \[-1.0\]"),
        ({"dt": "soon"}, "`dt` must be a positive number \\(years\\); got 'soon'"),
        ({"diffusivity": -1.0}, "`diffusivity` must be a finite number of m²/yr >= 0"),
        ({"runoff": -1.0}, "`runoff` must be a finite number >= 0"),
        ({"cell_size": None}, r"`cell_size` \(m\) is required"),
    ],
)
def test_bad_arguments_are_named(kwargs, message):
    options = {"cell_size": 10.0, "duration": 1e3, "dt": 100.0, "uplift": 1e-3, "erodibility": 1e-5} | kwargs
    with pytest.raises(ParameterError, match=message):
        simulate(np.ones((5, 6)), **options)


def test_open_edge_takes_one_history():
    with pytest.raises(ParameterError, match="either `elevation` or `lowering_rate`, not both"):
        open_edge(elevation=0.0, lowering_rate=1e-3)
    with pytest.raises(ParameterError, match="times must increase strictly"):
        open_edge(elevation=[(0.0, 1.0), (0.0, 2.0)])
