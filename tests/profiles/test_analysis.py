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
    for kp in result.knickpoints:
        assert kp["p_value"] < 0.05 and kp["distance_to_divide_m"] > 0
        assert kept[kp["position"]]

