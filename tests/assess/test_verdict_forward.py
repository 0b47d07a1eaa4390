"""The forward run as a line of evidence (`divides.outlook.forward_shift_cells`)."""

from __future__ import annotations

import numpy as np

import divides
from divides.outlook import forward_shift_cells

OPTIONS = dict(theta=0.1, channel_area_m2=3e4, closed_edges=("north", "south"), robustness=False, n_bootstrap=50)


def _planes(west_gradient: float, east_gradient: float) -> divides.Dem:
    # Two planes meeting at a crest in the middle of 41 columns of 100 m.
    c = np.arange(41.0)
    z = np.minimum(west_gradient * 100.0 * c, east_gradient * 100.0 * (40.0 - c))
    return divides.Dem.from_array(np.repeat(z[None], 6, axis=0), cell_size=100.0)


def test_the_steeper_side_gains_ground_whatever_the_side():
    # Gilbert (1877): the steeper flank erodes faster, so the crest moves into the gentler side;
    # under uniform uplift and erodibility this is the stream-power kinematics of two planes
    # (crest speed (E_a - E_b) / (S_a + S_b); Willett et al. 2014). Positive = into side b.
    into_b = forward_shift_cells(divides.assess(_planes(0.2, 0.1), "west", "east", **OPTIONS))
    into_a = forward_shift_cells(divides.assess(_planes(0.1, 0.2), "west", "east", **OPTIONS))
    assert into_b > 0 > into_a
    # mirror images move by the same amount (no preferred side)
    assert abs(into_b + into_a) <= 0.05 * abs(into_b)


def test_equal_planes_do_not_move_the_divide():
    # Symmetric planes: equal erosion on both sides, the crest stays (Gilbert 1877).
    shift = forward_shift_cells(divides.assess(_planes(0.15, 0.15), "west", "east", **OPTIONS))
    assert abs(shift) < 0.5  # less than half a cell: the resolution of the grid
