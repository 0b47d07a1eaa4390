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


def _shift(dem: divides.Dem, *, theta: float = 0.1, balance: str = "channels") -> tuple[float, int]:
    """Shift (model cells, positive into the east valley) of the divide between the two valleys, and the block size."""
    run = landscape_shift(dem, theta=theta, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4, balance=balance)
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


@pytest.mark.parametrize("balance", ["channels", "steady", "steady-basins"])
def test_under_either_balance_the_steeper_flank_gains_ground(balance):
    # Gilbert (1877), as above, with the uplift balancing the channels or the steady balance (U and D fitted,
    # one U or one per outlet basin).
    into_east, _ = _shift(_book(0.2, 0.1), balance=balance)
    into_west, _ = _shift(_book(0.1, 0.2), balance=balance)
    assert into_east > 0.5 and into_west < -0.5


# ---------------------------------------------------------------- the steady balance of a whole DEM
_U, _K, _D, _M = 2e-4, 2e-5, 0.02, 0.5


@pytest.fixture(scope="module")
def lopsided_steady():
    """A ridge with a valley per flank grown to steady state under uniform U, K and D, its east base level
    held 30 m above the west one, so the steady divide sits off centre (Whipple et al. 2017)."""
    from divides.model.scenarios import ridge_surface
    from divides.model.simulate import simulate

    start = ridge_surface((24, 40), crest=0.5, noise=1.0, seed=3)
    edges = {"north": "closed", "south": "closed", "west": 0.0, "east": 30.0}
    return simulate(start, duration=3e6, dt=1e4, uplift=_U, erodibility=_K, m=_M, n=1.0, diffusivity=_D,
                    edges=edges).final


def test_steady_uplift_recovers_the_uplift_and_diffusivity_over_k(lopsided_steady):
    # At steady state every cell obeys U = K A^m S^n - D lap(z) (Perron, Kirchner & Dietrich 2009; the
    # hilltop half is Roering et al. 2007): at K = 1 the fit over the whole DEM gives back U / K and D / K.
    # Tolerances as for the assessment's balance (tests/model/test_forward_run.py): the model splits each
    # step into incision then diffusion, so its steady surface meets the continuous balance to O(dt).
    from divides.model.landscape_shift import model_start, steady_uplift

    start = model_start(lopsided_steady, theta=_M, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4)
    uplift, diffusivity = steady_uplift(start, 1.0)
    inside = uplift[start.before > 0]
    assert np.all(inside == inside[0])  # one rate for the whole landscape
    assert inside[0] == pytest.approx(_U / _K, rel=0.05)
    assert diffusivity == pytest.approx(_D / _K, rel=0.4)
    per_basin, d_shared = steady_uplift(start, 1.0, per_basin=True)  # every basin was grown under the same U
    assert np.allclose(per_basin[start.before > 0], _U / _K, rtol=0.1)
    assert d_shared == pytest.approx(_D / _K, rel=0.4)


def test_an_unknown_balance_is_refused():
    with pytest.raises(ParameterError, match="balance"):
        landscape_shift(_book(0.2, 0.1), theta=0.1, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4, balance="x")


def test_runs_under_several_balances_share_one_model_grid():
    # Screening reads two runs (one U; one U per outlet basin) from one routed model grid: each equals the
    # run made on its own, so sharing the start changes nothing.
    from divides.model.landscape_shift import landscape_shifts

    dem = _book(0.2, 0.1)
    options = dict(theta=0.1, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4)
    shared = landscape_shifts(dem, balances=("steady", "steady-basins"), **options)
    for run, balance in zip(shared, ("steady", "steady-basins")):
        alone = landscape_shift(dem, balance=balance, **options)
        assert np.array_equal(run.before, alone.before) and np.array_equal(run.after, alone.after)
        assert run.n_steps == alone.n_steps

