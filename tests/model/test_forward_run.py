"""A forward run from a DEM between two sides (`divides.model.forward_run`)."""

from __future__ import annotations

import numpy as np
import pytest

import divides
from divides.errors import ParameterError
from divides.model.forward_run import coarsen, forward_shift
from divides.terrain.routing import route
from divides.terrain.sides import parse_side, resolve_sides

CLOSED = ("north", "south")


def _planes(west_gradient: float, east_gradient: float, scale: float = 1.0) -> divides.Dem:
    # Two planes meeting at a crest in the middle of 41 columns of 100 m.
    c = np.arange(41.0)
    z = scale * np.minimum(west_gradient * 100.0 * c, east_gradient * 100.0 * (40.0 - c))
    return divides.Dem.from_array(np.repeat(z[None], 6, axis=0), cell_size=100.0)


def _shift(dem: divides.Dem, **kw) -> float:
    sides = resolve_sides(route(dem, closed_edges=CLOSED), parse_side("west"), parse_side("east"))
    return forward_shift(dem, sides, theta=0.1, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4, **kw).shift_cells


def test_the_steeper_side_gains_ground_whatever_the_side():
    # Gilbert (1877): the steeper flank erodes faster, so the crest moves into the gentler side;
    # under uniform uplift and erodibility this is the stream-power kinematics of two planes
    # (crest speed (E_a - E_b) / (S_a + S_b); Willett et al. 2014). Positive = into side b.
    into_b, into_a = _shift(_planes(0.2, 0.1)), _shift(_planes(0.1, 0.2))
    assert into_b > 0 > into_a
    # mirror images move by the same amount (no preferred side)
    assert abs(into_b + into_a) <= 0.05 * abs(into_b)


def test_equal_planes_do_not_move_the_divide():
    # Symmetric planes: equal erosion on both sides, the crest stays (Gilbert 1877).
    assert abs(_shift(_planes(0.15, 0.15))) < 0.5  # less than half a cell: the resolution of the grid


def test_the_shift_does_not_depend_on_the_scale_of_relief_for_n_1():
    # n = 1: E = K A^m S is linear in the elevations, and the horizon is relief / U with U the
    # balancing erosion rate, so scaling every elevation leaves the shift in cells unchanged
    # (Royden & Perron 2013: the linear stream-power equation has no intrinsic elevation scale).
    assert _shift(_planes(0.2, 0.1, scale=3.0)) == pytest.approx(_shift(_planes(0.2, 0.1)), rel=1e-6, abs=1e-9)


def test_uplift_balanced_per_side_keeps_a_lopsided_steady_divide():
    # Each side uplifted at its own erosion rate: U_a - E_a = U_b - E_b = 0, so the crest does not
    # move (crest kinematics; Gilbert 1877, Forte & Whipple 2018) however lopsided the flanks.
    lopsided = _planes(0.2, 0.1)
    assert abs(_shift(lopsided, uplift_mode="sides")) < 0.5 < _shift(lopsided)
    with pytest.raises(ParameterError, match="uplift_mode"):
        _shift(lopsided, uplift_mode="tilted")


def test_coarsen_is_a_block_mean():
    # 2 x 2 block means of 0..35 laid out 6 x 6: the first block holds 0, 1, 6, 7 (mean 3.5; arithmetic)
    small, f = coarsen(divides.Dem.from_array(np.arange(36.0).reshape(6, 6), cell_size=10.0), max_cells=3)
    assert (f, small.shape, float(small.dx[0]), float(small.elevation[0, 0])) == (2, (3, 3), 20.0, 3.5)


@pytest.mark.parametrize("n", [1.0, 1.5])
def test_a_run_at_erodibility_k_moves_the_divide_as_the_unit_run_scaled_in_time(n):
    # dz/dt = K (c - A^m S^n) with uplift balancing at the same K: the solution at K over time t equals
    # the one at K = 1 over K t (Royden & Perron 2013), so the rate of the divide is K x the unit rate.
    from divides.model.forward_run import balance_uplift, prepare, run_model

    dem = _planes(0.2, 0.1)
    sides = resolve_sides(route(dem, closed_edges=CLOSED), parse_side("west"), parse_side("east"))
    unit = forward_shift(dem, sides, theta=0.3, n=n, closed_edges=CLOSED, channel_area_m2=3e4)
    k = 3e-5
    setup = prepare(dem, sides, factor=1, closed_edges=CLOSED, channel_area_m2=3e4)
    assert balance_uplift(setup, np.asarray(k), 0.3 * n, n)[0] > 0
    run = run_model(setup, label="K", theta=0.3, n=n, k=(k, k), years=unit.years_unit_k / k, uplift_mode="uniform",
                    diffusivity=0.0, max_steps=60)
    measured = run.displacement_m[-1] / (unit.years_unit_k / k)
    assert float(unit.rate_m_per_yr(k)) == pytest.approx(measured, rel=1e-6)
    assert measured > 0  # into the gentler side b (Gilbert 1877)


def test_a_side_s_power_at_other_exponents_is_the_mean_over_gilbert_s_planes():
    # Two planes (Gilbert 1877) meeting at a single crest column: 6 rows of 31 columns of 100 m, the west
    # plane 0.2 steep up to the crest at column 10 (200 m), the east one 0.1. D8 on a plane sends every
    # cell straight down its row, so the cell j columns below the crest on its row drains j + 1 cells:
    # A = (j + 1) 1e4 m², S the plane's gradient; the outlets at the edges have no slope (A^m S^n = 0).
    # The crest drains west (its steeper drop). By hand: side a (columns 0-10) has mean
    # A^m S^n = (1/11) sum_{i=1..10} (i 1e4)^m 0.2^n, side b (columns 11-30) (1/20) sum_{i=1..19} (i 1e4)^m 0.1^n.
    c = np.arange(31.0)
    z = np.minimum(0.2 * 100.0 * c, 0.1 * 100.0 * (30.0 - c))
    dem = divides.Dem.from_array(np.repeat(z[None], 6, axis=0), cell_size=100.0)
    sides = resolve_sides(route(dem, closed_edges=CLOSED), parse_side("west"), parse_side("east"))
    run = forward_shift(dem, sides, theta=0.4, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4)
    assert run.carries_exponents
    theta, n = np.array([0.4, 0.55, 0.3]), np.array([1.0, 1.3, 0.8])
    m = theta * n
    i_a, i_b = np.arange(1, 11.0), np.arange(1, 20.0)
    hand_a = np.array([np.sum((i_a * 1e4) ** mm * 0.2**nn) / 11 for mm, nn in zip(m, n)])
    hand_b = np.array([np.sum((i_b * 1e4) ** mm * 0.1**nn) / 20 for mm, nn in zip(m, n)])
    power_a, power_b = run.side_powers(theta, n)
    np.testing.assert_allclose(power_a, hand_a, rtol=1e-9)
    np.testing.assert_allclose(power_b, hand_b, rtol=1e-9)
    assert run.power_a == pytest.approx(hand_a[0], rel=1e-9)  # the run's own exponents: the recorded power
    # The balancing uplift (K = 1): the mean of each side's median A^m S^n over its channels (A >= 3e4 m²):
    # side a has 6 rows of A = 3..10 x 1e4 (median between 6 and 7), side b 6 rows of 3..19 x 1e4 (median 11).
    hand_u = 0.5 * (0.5 * ((6e4) ** m + (7e4) ** m) * 0.2**n + (11e4) ** m * 0.1**n)
    np.testing.assert_allclose(run.balance_power(theta, n), hand_u, rtol=1e-9)
    # it sets the run's time scale: the horizon is 0.3 x relief (200 m) / U at the run's exponents
    assert run.years_unit_k == pytest.approx(0.3 * 200.0 / hand_u[0], rel=1e-9)
    # the reference channel: the threshold 3e4 m² at the median channel slope (102 of 150 channels at 0.1)
    assert run.reference == pytest.approx((3e4, 0.1))
