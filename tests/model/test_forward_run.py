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


def test_coarsen_is_a_block_mean():
    # 2 x 2 block means of 0..35 laid out 6 x 6: the first block holds 0, 1, 6, 7 (mean 3.5; arithmetic)
    small, f = coarsen(divides.Dem.from_array(np.arange(36.0).reshape(6, 6), cell_size=10.0), max_cells=3)
    assert (f, small.shape, float(small.dx[0]), float(small.elevation[0, 0])) == (2, (3, 3), 20.0, 3.5)


def test_the_block_mean_read_a_few_rows_of_blocks_at_a_time_is_the_mean_of_each_block(monkeypatch):
    # Each f x f block's mean of its finite cells, NaN when fewer than half are (definition; the last rows and
    # columns padded by repeating the edge), by brute force over a grid with holes, whether the grid is read whole
    # or one row of blocks at a time (so a DEM of 10^8 cells needs no grid-sized copies).
    import divides.model.forward_run as fr

    rng = np.random.default_rng(4)
    z = rng.normal(500.0, 50.0, size=(23, 31))
    valid = rng.random(z.shape) > 0.3
    f = 4
    padded = np.pad(np.where(valid, z, np.nan), ((0, 1), (0, 1)), mode="edge")  # 24 x 32
    expected = np.full((6, 8), np.nan)
    for i in range(6):
        for j in range(8):
            block = padded[f * i: f * i + f, f * j: f * j + f]
            if 2 * np.isfinite(block).sum() >= f * f:
                expected[i, j] = np.nanmean(block)
    assert np.isnan(expected).any() and np.isfinite(expected).any()
    np.testing.assert_allclose(fr.block_mean(z, f, valid=valid), expected, rtol=1e-12)
    monkeypatch.setattr(fr, "BLOCK_MEAN_CELLS", 1)
    np.testing.assert_allclose(fr.block_mean(z, f, valid=valid), expected, rtol=1e-12)


@pytest.mark.parametrize("n", [1.0, 1.5])
def test_a_run_at_erodibility_k_moves_the_divide_as_the_unit_run_scaled_in_time(n):
    # dz/dt = K (c - A^m S^n) with uplift balancing at the same K: the solution at K over time t equals
    # the one at K = 1 over K t (Royden & Perron 2013), so the rate of the divide is K x the unit rate.
    # U and D of the steady balance both scale with K (U = K A^m S^n - D lap z), so they do too.
    from divides.model.forward_run import prepare, run_model, steady_balance

    dem = _planes(0.2, 0.1)
    sides = resolve_sides(route(dem, closed_edges=CLOSED), parse_side("west"), parse_side("east"))
    unit = forward_shift(dem, sides, theta=0.3, n=n, closed_edges=CLOSED, channel_area_m2=3e4)
    k = 3e-5
    setup = prepare(dem, sides, factor=1, closed_edges=CLOSED, channel_area_m2=3e4)
    fit_k, fit_1 = steady_balance(setup, k, 0.3 * n, n), steady_balance(setup, 1.0, 0.3 * n, n)
    assert fit_k.uplift[0] > 0 and fit_k.diffusivity > 0
    assert fit_k.uplift[0] == pytest.approx(k * fit_1.uplift[0], rel=1e-9)
    assert fit_k.diffusivity == pytest.approx(k * fit_1.diffusivity, rel=1e-9)
    run = run_model(setup, label="K", theta=0.3, n=n, k=(k, k), years=unit.years_unit_k / k, uplift_mode="uniform",
                    diffusivity=None, max_steps=60, balance="steady")
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
    # The run's uplift (K = 1), the steady balance U = A^m S^n - D lap z (Perron et al. 2009) by least squares
    # over the cells with a slope and a full stencil: rows 1-4, columns 1-29. lap z is 0 on the planes and
    # (180 + 190 - 2 x 200) / 100² = -0.003 on the crest column (A = 1e4, S = 0.2) alone, so the fitted line
    # passes through the mean of the plane cells: U is the mean of A^m S^n over columns 1-9 (A = 2..10 x 1e4,
    # S = 0.2) and 11-29 (A = 1..19 x 1e4, S = 0.1), provided D = (U - crest) / 0.003 comes out positive.
    plane = np.array([(np.sum((np.arange(2, 11.0) * 1e4) ** mm * 0.2**nn)
                       + np.sum((np.arange(1, 20.0) * 1e4) ** mm * 0.1**nn)) / 28 for mm, nn in zip(m, n)])
    assert np.all(plane > 1e4**m * 0.2**n)  # D > 0: not clipped
    np.testing.assert_allclose(run.balance_power(theta, n), plane, rtol=1e-9)
    # it sets the run's time scale: the horizon is 0.3 x relief (200 m) / U at the run's exponents
    assert run.years_unit_k == pytest.approx(0.3 * 200.0 / plane[0], rel=1e-9)
    # the reference channel: the threshold 3e4 m² at the median channel slope (102 of 150 channels at 0.1)
    assert run.reference == pytest.approx((3e4, 0.1))


# ---------------------------------------------------------------- steady balance (uplift and diffusivity)
_U, _K, _D, _M = 2e-4, 2e-5, 0.02, 0.5


@pytest.fixture(scope="module")
def lopsided_steady():
    """A ridge grown to steady state under uniform U, K and D, its east base level held 30 m above the
    west one, so the steady divide sits off centre (a lopsided steady divide; Whipple et al. 2017)."""
    from divides.model.scenarios import ridge_surface
    from divides.model.simulate import simulate

    start = ridge_surface((24, 40), crest=0.5, noise=1.0, seed=3)
    edges = {"north": "closed", "south": "closed", "west": 0.0, "east": 30.0}
    return simulate(start, duration=3e6, dt=1e4, uplift=_U, erodibility=_K, m=_M, n=1.0, diffusivity=_D,
                    edges=edges).final


def _setup(dem):
    from divides.model.forward_run import prepare

    sides = resolve_sides(route(dem, closed_edges=CLOSED), parse_side("west"), parse_side("east"))
    return prepare(dem, sides, factor=1, closed_edges=CLOSED, channel_area_m2=3e4)


def test_steady_balance_recovers_the_uplift_and_diffusivity_a_steady_landscape_was_grown_with(lopsided_steady):
    # At steady state every cell obeys U = K A^m S^n - D lap(z) (Perron, Kirchner & Dietrich 2009,
    # Nature 460; the hilltop half is E = -D C_ht of Roering et al. 2007): the least-squares fit over
    # both sides must give back the U and D the landscape was grown with. Tolerances: the model splits
    # each 1e4-yr step into incision then diffusion (first-order operator splitting), so its steady
    # surface satisfies the continuous balance only to O(dt): about 30 % on D here, shrinking with the
    # step (from memory of splitting error; the fit is exact on a surface that satisfies it).
    from divides.model.forward_run import steady_balance

    setup = _setup(lopsided_steady)
    fit = steady_balance(setup, _K, _M, 1.0)
    assert fit.fitted and fit.uplift[0] == fit.uplift[1]
    assert fit.uplift[0] == pytest.approx(_U, rel=0.03)
    assert fit.diffusivity == pytest.approx(_D, rel=0.4)
    given = steady_balance(setup, _K, _M, 1.0, diffusivity=_D)
    assert not given.fitted and given.diffusivity == _D and given.uplift[0] == pytest.approx(_U, rel=0.03)
    # per side: both sides were grown under the same U
    sides = steady_balance(setup, _K, _M, 1.0, by_side=True)
    assert sides.uplift == pytest.approx((_U, _U), rel=0.05)


def test_a_lopsided_steady_divide_stays_put_under_the_steady_balance(lopsided_steady):
    # A steady state does not move (by definition; Whipple et al. 2017: lopsided steady divides are
    # stable although their flanks differ). Run from it with U and D fitted to the steady balance, the
    # divide stays within half a cell and the surface within 2 % of its relief. With a diffusivity
    # twenty times too low (the forecast's old default, 1e-3 m²/yr), no uplift balances both the
    # channels and the crest, and the divide moves by more than half a cell.
    from divides.model.forward_run import run_model

    setup = _setup(lopsided_steady)
    relief = float(np.nanmax(lopsided_steady.elevation))
    common = dict(theta=_M, n=1.0, k=(_K, _K), years=1e6, uplift_mode="uniform", max_steps=400)
    steady = run_model(setup, label="steady", diffusivity=None, balance="steady", **common)
    assert abs(steady.displacement_m[-1]) < 50.0  # half a 100-m cell
    assert np.nanmean(np.abs(steady.final.elevation - lopsided_steady.elevation)) < 0.02 * relief
    old = run_model(setup, label="old", diffusivity=1e-3, balance="steady", **common)
    assert abs(old.displacement_m[-1]) > 50.0
    with pytest.raises(ParameterError, match="balance='steady'"):
        run_model(setup, label="x", diffusivity=None, **common)


def test_the_assessment_s_forward_run_keeps_a_lopsided_steady_divide_still(lopsided_steady):
    # The forward run of the assessment knows neither K nor U nor D: K = 1, U and D fitted to the present
    # surface's steady balance (Perron et al. 2009). From a lopsided ridge grown to steady state (Whipple et
    # al. 2017: stable although its flanks differ) it moves the divide less than half a cell over its
    # horizon. (That the same run moves a divide that is out of balance is held by Gilbert's planes above.)
    sides = resolve_sides(route(lopsided_steady, closed_edges=CLOSED), parse_side("west"), parse_side("east"))
    run = forward_shift(lopsided_steady, sides, theta=_M, n=1.0, closed_edges=CLOSED, channel_area_m2=3e4)
    assert np.isfinite(run.years_unit_k) and run.years_unit_k > 0
    assert abs(run.shift_cells) < 0.5


def test_a_side_follows_its_channel_when_the_mouth_shifts_along_the_edge():
    # A side is the basins that were mostly its own at the start, not the cells draining through its
    # start's outlet: a valley draining to the north edge at column 3 (by construction, one basin of
    # the whole grid) whose mouth moves to column 6 is still the same side.
    from divides.model.forward_run import _side_masks

    rows, cols = 8, 10
    r, c = np.mgrid[0:rows, 0:cols].astype(float)

    def valley(col):
        return divides.Dem.from_array(1.0 * r + 10.0 * np.abs(c - col), cell_size=100.0)

    start = route(valley(3), closed_edges=("south", "west", "east"))
    later = route(valley(6), closed_edges=("south", "west", "east"))
    mouth = np.ravel_multi_index((0, 3), (rows, cols))
    start_a = start.basins() == start.basins().ravel()[mouth]
    start_b = np.zeros_like(start_a)
    assert start_a.sum() > rows * cols // 2
    now_a, now_b = _side_masks(later, start_a, start_b)
    assert now_a.sum() >= start_a.sum() - cols and not now_b.any()
    # through the old mouth cell alone, the side would have collapsed to a sliver
    assert later.area.ravel()[mouth] < 0.1 * later.area.max()
