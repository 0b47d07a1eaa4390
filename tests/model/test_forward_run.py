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
