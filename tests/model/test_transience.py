"""Transience of outlet basins: lower channels eroding unlike upper ones (`divides.model.transience`)."""

from __future__ import annotations

import numpy as np
import pytest

from divides.model.landscape_shift import model_start
from divides.model.transience import basin_transience

_U, _K, _D, _M = 2e-4, 2e-5, 0.02, 0.5
EDGES = {"north": "closed", "south": "closed", "west": 0.0, "east": 0.0}


@pytest.fixture(scope="module")
def steady_ridge():
    """A ridge with open west and east edges grown to steady state under uniform U, K and D (3 Myr, over ten
    response times of its channels)."""
    from divides.model.scenarios import ridge_surface
    from divides.model.simulate import simulate

    start = ridge_surface((40, 60), crest=0.5, noise=1.0, seed=3)
    return simulate(start, duration=3e6, dt=1e4, uplift=_U, erodibility=_K, m=_M, n=1.0, diffusivity=_D,
                    edges=EDGES).final


def _by_flank(dem) -> tuple[np.ndarray, np.ndarray]:
    """Transience of the measured basins draining west and of those draining east."""
    start = model_start(dem, theta=_M, n=1.0, closed_edges=("north", "south"), channel_area_m2=3e4)
    t = basin_transience(start, 1.0)
    measured = np.flatnonzero(np.isfinite(t))
    cols = np.array([np.mean(np.nonzero(start.before == k)[1]) for k in measured])
    half = dem.shape[1] / 2
    return t[measured[cols < half]], t[measured[cols >= half]]


def test_steady_basins_are_not_transient(steady_ridge):
    # At steady state every channel erodes at the uplift rate, U = K A^m S^n - D lap(z) (Perron, Kirchner &
    # Dietrich 2009), so lower and upper channels erode alike: ln(E_lower / E_upper) = 0 up to the model's
    # O(dt) splitting and D8 discretisation (the tolerance, 0.15, is ours: a quarter of ln 1.8, the fall below).
    west, east = _by_flank(steady_ridge)
    assert west.size >= 3 and east.size >= 3  # basins on both flanks are measured
    assert np.all(np.abs(np.r_[west, east]) < 0.15)


def test_a_fall_of_base_level_makes_only_the_fallen_basins_transient(steady_ridge):
    # A 50 m drop of the west base level climbs the west channels as a knickpoint (Whipple & Tucker
    # 1999): 0.2 Myr on, the west basins' lower and upper channels erode at rates that differ
    # by far more than the steady tolerance, whichever half the wave is in; the east basins stay steady.
    from divides.model.simulate import simulate

    fell = simulate(steady_ridge, duration=2e5, dt=1e4, uplift=_U, erodibility=_K, m=_M, n=1.0, diffusivity=_D,
                    edges={**EDGES, "west": -50.0}).final
    west, east = _by_flank(fell)
    assert west.size >= 3 and np.all(np.abs(west) > 0.3)
    assert np.all(np.abs(east) < 0.15)


def test_basins_too_small_to_read_are_not_measured(steady_ridge):
    # Fewer than MIN_BALANCE_CELLS channel cells: no median worth comparing (NaN, never 0 = "steady").
    from divides.model.landscape_shift import MIN_BALANCE_CELLS

    start = model_start(steady_ridge, theta=_M, n=1.0, closed_edges=("north", "south"), channel_area_m2=3e4)
    t = basin_transience(start, 1.0)
    cells = np.bincount(start.before.ravel()[start.cells], minlength=t.size)
    assert np.all(np.isnan(t[cells < MIN_BALANCE_CELLS]))
    assert np.isnan(t[0])


def test_a_landscape_too_small_to_read_gives_no_transience():
    # A tilted plane of 8 x 8 cells has no basin with MIN_BALANCE_CELLS channel cells: every basin is unmeasured
    # (NaN), and nothing fails.
    import divides

    z = np.add.outer(np.arange(8.0), np.arange(8.0)) * 5.0
    start = model_start(divides.Dem.from_array(z, cell_size=30.0), theta=0.5, n=1.0, closed_edges=(),
                        channel_area_m2=2e3)
    t = basin_transience(start, 1.0)
    assert t.size == int(start.before.max()) + 1 and np.isnan(t).all()


def test_the_spread_under_dem_error_grows_with_the_error(steady_ridge):
    # Propagation of error (common practice): with no DEM error every draw gives the same T (spread 0); the spread
    # of T over draws of correlated error grows with the error's sigma; basins without a T have no spread.
    from divides.model.transience import transience_spread
    from divides.terrain.dem_error import DemError

    start = model_start(steady_ridge, theta=_M, n=1.0, closed_edges=("north", "south"), channel_area_m2=3e4)
    t = basin_transience(start, 1.0)
    measured = np.isfinite(t)
    none, small, large = (transience_spread(start, 1.0, DemError(sigma, 300.0), draws=8)
                          for sigma in (0.0, 0.25, 2.0))
    np.testing.assert_array_equal(none[measured], 0.0)
    assert np.median(large[measured]) > 2.0 * np.median(small[measured]) > 0.0
    assert np.all(np.isnan(large[~measured]))
