"""One forward run of a whole DEM and the shift of each piece of its divides (`divides.model.landscape_shift`)."""

from __future__ import annotations

import math

import numpy as np
import pytest

import divides
from divides.errors import ParameterError
from divides.model.landscape_shift import landscape_shift
from divides.model.outlet_exchange import outlet_basins
from divides.terrain.divide_lines import divide_between
from divides.terrain.routing import route

CLOSED = ("north", "south")


def _book(west_gradient: float, east_gradient: float, *, rows: int = 13, cols: int = 41,
          cell: float = 100.0) -> divides.Dem:
    # Gilbert's two planes meeting at a crest, folded along the middle row so that each flank drains
    # through one valley (one outlet basin a side) to the open west and east edges.
    c, r = np.arange(cols, dtype=float), np.arange(rows, dtype=float)
    z = np.minimum(west_gradient * cell * c, east_gradient * cell * (cols - 1 - c))[None, :] \
        + 0.1 * cell * np.abs(r - (rows - 1) / 2)[:, None]
    return divides.Dem.from_array(z, cell_size=cell)


def _shift(dem: divides.Dem) -> tuple[float, int]:
    """Shift (model cells, positive into the east valley) of the divide between the two valleys, and the block size."""
    run = landscape_shift(dem, theta=0.1, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4)
    labels, _ = outlet_basins(route(dem, closed_edges=CLOSED), min_cells=1)
    mid = dem.shape[0] // 2
    west, east = int(labels[mid, 1]), int(labels[mid, -2])
    lines = divide_between(dem, labels == west, labels == east).lines  # the west valley on the left
    assert len(lines) == 1
    return run.piece_shift(lines[0], run.on_model_grid(labels), west, east), run.factor


def test_the_steeper_flank_gains_ground_whatever_the_side():
    # Gilbert (1877): under uniform uplift and erodibility the steeper flank erodes faster and the
    # crest moves into the gentler side (crest kinematics, Willett et al. 2014); mirror images move
    # by the same amount the other way.
    into_east, _ = _shift(_book(0.2, 0.1))
    into_west, _ = _shift(_book(0.1, 0.2))
    assert into_east > 0.5 and into_west < -0.5
    assert abs(into_east + into_west) <= 0.05 * abs(into_east)


def test_equal_flanks_do_not_move_the_divide():
    # Symmetric flanks erode equally: the crest stays (Gilbert 1877); within a quarter of a model cell,
    # below the noise level the screening reads a shift at (0.1 cell is FORWARD_NOISE_CELLS; 0.25 leaves
    # room for D8's tie-breaking, which is not mirror-symmetric).
    shift, _ = _shift(_book(0.15, 0.15))
    assert abs(shift) < 0.25


def test_a_dem_larger_than_the_model_grid_is_block_averaged_and_read_back():
    # 361 columns exceed the 300 of the model grid: the run is on 2 x 2 blocks, the DEM's lines and
    # labels are carried onto it; Gilbert's rule holds there too, and equal flanks still stay.
    into_east, factor = _shift(_book(0.2, 0.1, rows=31, cols=361, cell=20.0))
    still, _ = _shift(_book(0.15, 0.15, rows=31, cols=361, cell=20.0))
    assert factor == 2
    assert into_east > 0.5 and abs(still) < 0.25


def test_a_flat_dem_is_not_run_and_nothing_moves():
    # No relief: no response time, nothing to erode (common practice: no evidence is not motion).
    dem = divides.Dem.from_array(np.zeros((8, 12)), cell_size=30.0)
    run = landscape_shift(dem, theta=0.45, n=1.0, closed_edges=CLOSED, channel_area_m2=1e4)
    assert run.n_steps == 0 and math.isinf(run.years_unit_k)
    halves = np.where(np.arange(12) < 6, 1, 2)[None, :].repeat(8, 0)
    line = divide_between(dem, halves == 1, halves == 2).lines[0]
    assert run.piece_shift(line, halves, 1, 2) == 0.0


def test_sides_in_one_basin_of_the_run_are_not_measured():
    dem = _book(0.2, 0.1)
    run = landscape_shift(dem, theta=0.1, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4)
    labels, _ = outlet_basins(route(dem, closed_edges=CLOSED), min_cells=1)
    mid = dem.shape[0] // 2
    west, east = int(labels[mid, 1]), int(labels[mid, -2])
    line = divide_between(dem, labels == west, labels == east).lines[0]
    one = np.where(labels > 0, 1, 0)  # both sides given the same basin
    assert math.isnan(run.piece_shift(line, one, 1, 1))


def test_a_horizon_that_is_not_positive_is_refused():
    with pytest.raises(ParameterError, match="horizon"):
        landscape_shift(_book(0.2, 0.1), theta=0.1, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4,
                        horizon_tau=0.0)
