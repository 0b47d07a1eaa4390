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


@pytest.mark.parametrize("balance", ["x", "steady-local", "steady-local0", "steady-local-3", "steady-localx",
                                     "steady-localnan"])
def test_an_unknown_balance_is_refused(balance):
    with pytest.raises(ParameterError, match="balance"):
        landscape_shift(_book(0.2, 0.1), theta=0.1, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4, balance=balance)


# ---------------------------------------------------------------- the steady balance read locally
_STEP_COL = 30  # the east flank uplifts twice as fast from this column to its base level


@pytest.fixture(scope="module")
def stepped_steady():
    """A ridge grown to steady state under an uplift twice as fast over the lower east flank (a step inside the east
    valleys, off the divide), with the same run continued 0.3 Myr (the truth: the divide does not move)."""
    from divides.model.scenarios import ridge_surface
    from divides.model.simulate import simulate

    uplift = np.broadcast_to(np.where(np.arange(40) >= _STEP_COL, 2.0 * _U, _U), (24, 40)).copy()
    forcing = dict(uplift=uplift, erodibility=_K, m=_M, n=1.0, diffusivity=_D,
                   edges={"north": "closed", "south": "closed", "west": 0.0, "east": 0.0})
    grown = simulate(ridge_surface((24, 40), crest=0.5, noise=1.0, seed=3), duration=3e6, dt=1e4, **forcing).final
    return grown, simulate(grown, duration=3e5, dt=1e4, **forcing).final


_SIGMA = 2.0  # the local balance's window in these tests (model cells; the model grid is the DEM's here)


def _balances_of(grown: divides.Dem):
    """The model start of ``grown`` and its local (σ = _SIGMA) and per-basin steady balances, each (U, D)."""
    from divides.model.landscape_shift import local_uplift, model_start, steady_uplift

    start = model_start(grown, theta=_M, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4)
    return start, local_uplift(start, 1.0, _SIGMA), steady_uplift(start, 1.0, per_basin=True)


def _west_cells_per_row(labels: np.ndarray) -> np.ndarray:
    """Cells per row in the outlet basins that drain off the west edge (the divide's column, row by row)."""
    return np.isin(labels, np.setdiff1d(np.unique(labels[:, 0]), [0])).sum(axis=1)


def test_the_local_balance_recovers_an_uplift_step_inside_a_basin(stepped_steady):
    # At steady state U = K A^m S^n - D lap(z) at every cell (Perron, Kirchner & Dietrich 2009), so the balance read
    # over a window gives back U / K on either side of the step, away from it; one rate per basin cannot (it is one
    # value across the step). Tolerance as for the whole-landscape fit above (0.05 on U; the fitted D is off by up
    # to 0.4, and the residual carries that error on curved cells).
    start, (local, _), (per_basin, _) = _balances_of(stepped_steady[0])
    main = np.isin(start.before, np.flatnonzero(np.bincount(start.before.ravel()) >= 50)) & (start.before > 0)
    cols = np.broadcast_to(np.arange(40), main.shape)
    slow = main & (cols < _STEP_COL - 3 * _SIGMA)
    fast = main & (cols >= _STEP_COL + 2 * _SIGMA)
    assert fast.sum() >= 20 and slow.sum() >= 200
    assert np.median(local[slow]) == pytest.approx(_U / _K, rel=0.05)
    assert np.median(local[fast]) == pytest.approx(2.0 * _U / _K, rel=0.1)
    straddling = np.unique(start.before[fast])
    assert all(np.ptp(per_basin[start.before == k]) == 0.0 for k in straddling)  # one value across the step


def test_the_local_balance_keeps_a_steady_divide_still_where_one_rate_per_basin_moves_it(stepped_steady):
    # Truth measured by continuing the model under its own forcing: the divide stays. The run under the balance read
    # locally keeps it within a quarter of a model cell (as the equal flanks above); with one rate per basin the
    # heads of the valleys that straddle the step are uplifted at a mixed rate, and the divide moves.
    from divides.model.landscape_shift import landscape_shifts

    grown, continued = stepped_steady
    before, after = (outlet_basins(route(dem, closed_edges=CLOSED), min_cells=1)[0] for dem in (grown, continued))
    assert np.array_equal(_west_cells_per_row(before), _west_cells_per_row(after))
    basins, local = landscape_shifts(grown, theta=_M, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4,
                                     balances=("steady-basins", "steady-local2"))
    moved = [float(np.mean(_west_cells_per_row(run.after) - _west_cells_per_row(run.before)))
             for run in (basins, local)]
    assert abs(moved[1]) < 0.25 and abs(moved[0]) >= 0.5


def test_the_local_balance_is_the_gaussian_weighted_mean_of_its_basin(stepped_steady):
    # The normalised convolution (Knutsson & Westin 1993) re-derived by brute force: each cell's U is the mean of the
    # steady residual over the readable cells of its own basin, weighted by exp(-d^2 / 2 sigma^2) within 3 sigma
    # (square window, as a separable Gaussian filter truncated there).
    from divides.model.landscape_shift import MIN_BALANCE_CELLS, balance_terms

    start, (local, d), (basin_u, d_basins) = _balances_of(stepped_steady[0])
    assert d == d_basins
    fluvial, lap, sel = balance_terms(start, 1.0)
    rows, cols = start.grid.shape
    lab, readable = start.before.ravel(), sel
    counts = np.bincount(lab[readable], minlength=lab.max() + 1)
    reach = int(round(3 * _SIGMA))
    for i in range(rows * cols):
        k = lab[i]
        if k == 0:
            continue
        if counts[k] < MIN_BALANCE_CELLS:  # small basins keep the per-basin rate
            assert local.ravel()[i] == basin_u.ravel()[i]
            continue
        r, c = divmod(i, cols)
        num = den = 0.0
        for rr in range(max(r - reach, 0), min(r + reach + 1, rows)):
            for cc in range(max(c - reach, 0), min(c + reach + 1, cols)):
                j = rr * cols + cc
                if lab[j] == k and readable[j]:
                    w = math.exp(-((rr - r) ** 2 + (cc - c) ** 2) / (2 * _SIGMA ** 2))
                    num += w * (fluvial[j] - d * lap[j])
                    den += w
        expected = max(num / den, 0.0) if den > 0 else max(basin_u.ravel()[i], 0.0)
        assert local.ravel()[i] == pytest.approx(expected, rel=1e-9, abs=1e-9)


@pytest.mark.parametrize("workers", [1, 2])
def test_runs_under_several_balances_share_one_model_grid(workers):
    # Screening reads two runs (one U; one U per outlet basin) from one routed model grid: each equals the
    # run made on its own, so sharing the start changes nothing, nor does running them side by side on two
    # threads (each run is deterministic and only reads the start; common practice for a parallel map).
    from divides.model.landscape_shift import landscape_shifts

    dem = _book(0.2, 0.1)
    options = dict(theta=0.1, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4)
    shared = landscape_shifts(dem, balances=("steady", "steady-basins"), workers=workers, **options)
    for run, balance in zip(shared, ("steady", "steady-basins")):
        alone = landscape_shift(dem, balance=balance, **options)
        assert np.array_equal(run.before, alone.before) and np.array_equal(run.after, alone.after)
        assert np.array_equal(run.match, alone.match) and run.n_steps == alone.n_steps

