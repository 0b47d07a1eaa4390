"""The profile analysis of both sides of a divide, on real and synthetic DEMs."""

from __future__ import annotations

import matplotlib.cbook
import numpy as np
import pytest
from affine import Affine

import divides
from divides.profiles import analyse_profiles
from divides.profiles.analysis import network_concavity


@pytest.fixture(scope="module")
def jacksboro():
    # Real 3 arc-second DEM shipped with matplotlib (its 'ymin' is the northern edge).
    d = matplotlib.cbook.get_sample_data("jacksboro_fault_dem.npz")
    t = Affine(float(d["dx"]), 0, float(d["xmin"]), 0, -float(d["dy"]), float(d["ymin"]))
    dem = divides.Dem.from_array(d["elevation"], transform=t, crs="EPSG:4326")
    flow = divides.route(dem)
    return flow, divides.extract_channels(flow)


def test_real_dem_concavity_in_the_range_of_natural_rivers(jacksboro):
    # Published range of best-fit concavity of natural rivers: 0.2-0.8
    # (Whipple 2004; Gailleton et al. 2021 give a median of 0.425, IQR 0.225-0.575).
    flow, channels = jacksboro
    est = network_concavity(channels, n_boot=30)
    assert 0.2 <= est["collinearity"].value <= 0.8
    assert est["collinearity"].ci95[0] <= est["collinearity"].value <= est["collinearity"].ci95[1]
    assert 0.2 <= est["slope_area"].value <= 0.8


def test_auto_theta_sets_aside_an_estimate_the_data_do_not_bound(jacksboro, monkeypatch):
    # An optimum at the end of the searched range is a boundary solution, not an estimate (common practice); natural
    # rivers' best-fit concavity lies in 0.2-0.8 (Whipple 2004; Gailleton et al. 2021), so θ = 0.002 with an
    # interval to 0.64 is not one to compute χ with: the reference 0.45 (Wobus et al. 2006) is used instead.
    import divides.profiles.analysis as analysis  # patched and called through one module object
    from divides.profiles.concavity import ConcavityEstimate

    flow, channels = jacksboro
    sides = divides.resolve_sides(flow, divides.parse_side("west"), divides.parse_side("east"))
    base = divides.common_base_level(channels, sides)
    edge = ConcavityEstimate(0.002, (0.002, 0.64), "collinearity", 15)
    monkeypatch.setattr(analysis, "concavity_by_collinearity", lambda *a, **k: edge)
    result = analysis.analyse_profiles(channels, sides, base, theta="auto", n_boot=0)
    assert (result.theta, result.theta_source) == (0.45, "reference")
    inside = ConcavityEstimate(0.52, (0.41, 0.63), "collinearity", 15)
    monkeypatch.setattr(analysis, "concavity_by_collinearity", lambda *a, **k: inside)
    result = analysis.analyse_profiles(channels, sides, base, theta="auto", n_boot=0)
    assert (result.theta, result.theta_source) == (0.52, "collinearity")


def test_real_dem_sides_run_to_completion(jacksboro):
    flow, channels = jacksboro
    sides = divides.resolve_sides(flow, divides.parse_side("west"), divides.parse_side("east"))
    base = divides.common_base_level(channels, sides)
    result = analyse_profiles(channels, sides, base, theta="auto", n_boot=20)
    summary = result.summary()
    assert summary["theta"]["source"] in ("collinearity", "reference")
    assert summary["ksn"]["a"] > 0 and summary["ksn"]["b"] > 0
    # two independent estimates of steepness at the reference concavity, χ-z segments and smoothed
    # slope-area (Wobus et al. 2006 describe both), agree on a real DEM within 30 %
    reference = analyse_profiles(channels, sides, base, theta=0.45, n_boot=0).summary()
    for side in ("a", "b"):
        assert reference["ksn_slope_area"][side] == pytest.approx(reference["ksn"][side], rel=0.3)
    # per-cell arrays line up with the channel cells; χ only where kept
    kept = base.kept_a | base.kept_b
    assert np.all(np.isfinite(result.chi[kept])) and np.all(np.isnan(result.chi[~kept]))
    assert np.all(np.isfinite(result.ksn[kept]))
    grid = result.grid(result.ksn)
    assert grid.shape == flow.shape and np.isfinite(grid).sum() == kept.sum()
    # knickpoints are searched on every channel of a side, below the common base level too: χ from
    # the own outlet is finite on every side channel; χ from the common base only above it
    on_side = (sides.a.mask | sides.b.mask).ravel()[channels.cells]
    assert np.all(np.isfinite(result.chi_outlet[on_side])) and np.all(np.isnan(result.chi_outlet[~on_side]))
    for kp in result.knickpoints:
        assert kp["p_value"] < 0.05 and kp["distance_to_divide_m"] > 0
        assert on_side[kp["position"]] and np.isfinite(kp["chi"])
        assert np.isfinite(kp["chi_base"]) == bool(kept[kp["position"]])



@pytest.fixture(scope="module")
def steady_landscape():
    # A ridge grown to steady state by the project's stream-power model (uniform U and K, m/n = 0.5,
    # n = 1): nothing migrates, so every knickpoint reported on it is false (Whipple & Tucker 1999).
    from divides.model import scenarios

    return scenarios.symmetric_divide((60, 120), seed=1).run(duration=3e6, dt=2e4).final


def _profiles(dem, **options):
    flow = divides.route(dem, closed_edges=("north", "south"))
    channels = divides.extract_channels(flow)
    sides = divides.resolve_sides(flow, divides.parse_side("west"), divides.parse_side("east"))
    return analyse_profiles(channels, sides, divides.common_base_level(channels, sides), n_boot=0, **options)


@pytest.mark.parametrize("added", [None, (1.0, 300.0), (1.0, 0.0)])
def test_steady_landscape_has_at_most_one_knickpoint(steady_landscape, added):
    # Issue target: at most 1 significant knickpoint on a steady landscape, with and without
    # correlated DEM error added (σ 1 m, correlation length 300 m = 3 cells, or white).
    from divides.terrain.dem_error import DemError

    dem = steady_landscape
    sigma = 0.1
    if added is not None:
        rng = np.random.default_rng(7)
        noise = DemError(*added).sample_grid(dem.shape, 100.0, rng)
        dem = divides.Dem.from_array(dem.elevation + noise, cell_size=100.0, valid_range=None)
        sigma = added[0]
    result = _profiles(dem, theta=0.5, dem_error=DemError.for_cell_size(sigma, 100.0))
    assert len(result.streams) >= 10
    assert len(result.knickpoints) <= 1
    for kp in result.knickpoints:
        assert kp["celerity_defined"] is True  # n = 1: every knickpoint moves as a unit


def test_vertical_resolution_still_sets_a_white_error_model(steady_landscape):
    # Without dem_error, vertical_resolution_m is σ of white error (the earlier interface).
    result = _profiles(steady_landscape, theta=0.5, vertical_resolution_m=1.0)
    assert len(result.knickpoints) <= 1


def test_knickpoints_of_a_base_level_fall_are_found_on_the_fallen_side_only(steady_landscape):
    # The steady ridge after its east edge fell 20 m, 20 000 years on: a wave of incision is climbing
    # the eastern channels (side b) only, steeper below than above (Whipple & Tucker 1999; Royden &
    # Perron 2013). With a small DEM error (σ 0.1 m, 3 cells), knickpoints are found there and nowhere else.
    from divides.model import scenarios
    from divides.model.simulate import simulate
    from divides.terrain.dem_error import DemError

    fall = scenarios.base_level_fall((60, 120), side="east", drop=20.0, seed=4)
    snap = simulate(steady_landscape, duration=2e4, dt=2e3, **fall.options).final
    result = _profiles(snap, theta=0.5, dem_error=DemError.for_cell_size(0.1, 100.0))
    sides = [kp["side"] for kp in result.knickpoints]
    assert sides.count("b") >= 2 and sides.count("a") == 0
    # The sudden drop is a step that the model's finite steps spread into a steepened reach: its top
    # (the lip, the front nearest the divide) is steeper below; its foot, lower on the same path, is
    # steeper above. The highest knickpoint on each path to a channel head is a lip.
    top: dict[int, dict] = {}
    for kp in result.knickpoints:
        if kp["head_position"] not in top or kp["elevation_m"] > top[kp["head_position"]]["elevation_m"]:
            top[kp["head_position"]] = kp
    assert all(kp["ksn_below"] > kp["ksn_above"] for kp in top.values())


def test_knickpoints_below_the_common_base_level_are_found_on_a_fallen_side(steady_landscape):
    # A 40 x 80 ridge 100 kyr after its east edge fell 20 m: the wave of incision launched by the fall
    # (Whipple & Tucker 1999; Royden & Perron 2013) has lowered most of the eastern channels below the
    # common base level (the western outlets, 0 m). The knickpoint search runs from each network's own
    # outlet, so the fallen side keeps its knickpoints; the steady western side has none.
    from divides.model import scenarios
    from divides.model.simulate import simulate
    from divides.terrain.dem_error import DemError

    shape = (40, 80)
    steady = scenarios.symmetric_divide(shape, seed=1).run(duration=3e6, dt=2e4).final
    fall = scenarios.base_level_fall(shape, side="east", drop=20.0, seed=4)
    snap = simulate(steady, duration=1e5, dt=4e3, **fall.options).final
    flow = divides.route(snap, closed_edges=("north", "south"))
    channels = divides.extract_channels(flow)
    sides = divides.resolve_sides(flow, divides.parse_side("west"), divides.parse_side("east"))
    base = divides.common_base_level(channels, sides)
    on_b = sides.b.mask.ravel()[channels.cells]
    assert np.count_nonzero(on_b & ~base.kept_b) > 0.5 * np.count_nonzero(on_b)  # mostly below the base
    result = analyse_profiles(channels, sides, base, theta=0.5, n_boot=0,
                              dem_error=DemError.for_cell_size(0.1, 100.0))
    sides_found = [kp["side"] for kp in result.knickpoints]
    assert sides_found.count("b") >= 1 and sides_found.count("a") == 0
    below = [kp for kp in result.knickpoints if kp["elevation_m"] < base.elevation_m]
    assert below and all(np.isnan(kp["chi_base"]) for kp in below)
    # steady before the fall: nothing on either side (issue 11 target: at most 1)
    assert len(_profiles(steady, theta=0.5, dem_error=DemError.for_cell_size(0.1, 100.0)).knickpoints) <= 1
