"""Divide sample points and the near-divide metrics, against brute force and analytic surfaces."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage

from divides import Dem, divide_between, parse_side, resolve_sides, route
from divides.assess.points import gradient_magnitude, local_relief, sample_divide, upstream_mean

CELL = 30.0


def test_upstream_mean_equals_brute_force():
    # Reference: walk receivers from every cell in plain Python and average over the cells that pass.
    rng = np.random.default_rng(1)
    dem = Dem.from_array(np.add.outer(np.arange(20.0), np.arange(15.0)) + rng.random((20, 15)) * 5, cell_size=CELL)
    flow = route(dem)
    field = rng.random(dem.shape)
    field[3, 4] = np.nan  # NaN values are skipped
    cells = np.arange(0, 300, 7)
    got = upstream_mean(flow, field, cells)
    rec = flow.receivers
    for k, target in enumerate(cells):
        members = []
        for i in range(300):
            j = i
            while True:
                if j == target:
                    members.append(i)
                    break
                if rec[j] == j:
                    break
                j = rec[j]
        vals = field.ravel()[members]
        vals = vals[np.isfinite(vals)]
        if vals.size == 0:
            assert np.isnan(got[k])
        else:
            assert got[k] == pytest.approx(vals.mean())


def test_gradient_of_a_plane_and_relief_window():
    # A plane z = 0.1 x + 0.2 y has gradient sqrt(0.1² + 0.2²) everywhere inside (analytic).
    rr, cc = np.mgrid[0:30, 0:40].astype(float)
    z = 0.1 * cc * 20.0 + 0.2 * (29 - rr) * 10.0
    dem = Dem.from_array(z, cell_size=(20.0, 10.0))
    flow = route(dem)
    g = gradient_magnitude(flow)
    np.testing.assert_allclose(g[1:-1, 1:-1], np.hypot(0.1, 0.2))
    # relief in a window of half-width 100 m: 5 cells east-west (20 m), 10 north-south (10 m),
    # compared with scipy's generic filter (max - min) on the same window.
    relief = local_relief(flow, 100.0)
    ref = ndimage.generic_filter(z, np.ptp, size=(21, 11), mode="nearest")
    np.testing.assert_allclose(relief, ref)


def test_asymmetric_ridge_metrics_and_normals():
    # Crest along column 59.5; west flank 3 x steeper than the east flank. Forte & Whipple (2018):
    # the steeper, lower side has the steeper hillslopes and higher relief; normals point into b (east).
    n = 120
    rr, cc = np.mgrid[0:n, 0:n].astype(float)
    rng = np.random.default_rng(2)
    d = cc - 59.5
    z = 1000.0 - np.where(d < 0, -d * 0.6, d * 0.2) * CELL + rng.random((n, n)) * 2.0
    z -= np.abs(rr - 60) * 0.05 * CELL  # gentle valleys so channels form
    dem = Dem.from_array(z, cell_size=CELL)
    flow = route(dem)
    sides = resolve_sides(flow, parse_side("west"), parse_side("east"))
    divide = divide_between(dem, sides.a.mask, sides.b.mask)
    pts = sample_divide(flow, divide, spacing_m=60.0, channel_area_m2=2e4, reference_area_m2=2e4,
                        chi_grid=np.zeros(dem.shape), relief_radius_m=300.0)
    assert np.median(pts.normal[:, 0]) > 0.95 and np.all(pts.normal[:, 0] > 0.5)  # east, into side b
    ga, gb = pts.values["hillslope_gradient"]
    assert np.nanmean(ga) > 2 * np.nanmean(gb)
    ea, eb = pts.values["channel_elevation"]
    assert np.nanmean(ea) < np.nanmean(eb)  # the steep side's channels are lower
    # hillslope relief = divide elevation - first channel cell elevation (Scherler & Schwanghart 2020)
    hr_a, _ = pts.values["hillslope_relief"]
    ok = pts.head_a >= 0
    np.testing.assert_allclose(hr_a[ok], pts.elevation_m[ok] - dem.elevation.ravel()[pts.head_a[ok]])


def test_a_divide_piece_with_room_for_one_sample_is_sampled():
    # Voids split a divide into short pieces; a piece shorter than 1.5 spacings gets one sample,
    # which used to reach np.gradient with one value ("Shape of array too small", issue 11).
    # Its normal then comes from the piece's own direction: a piece walking south (rows
    # increasing) with side a on its left has b to the west (right-hand normal; common practice).
    from divides.terrain.divide_lines import Divide, DivideLine

    n = 60
    rr, cc = np.mgrid[0:n, 0:n].astype(float)
    z = 1000.0 - np.abs(cc - 29.5) * 0.3 * CELL - np.abs(rr - 30) * 0.05 * CELL
    dem = Dem.from_array(z, cell_size=CELL)
    flow = route(dem)
    sides = resolve_sides(flow, parse_side("west"), parse_side("east"))
    divide = divide_between(dem, sides.a.mask, sides.b.mask)
    row = np.array([10.0, 11.0])
    col = np.array([29.5, 29.5])
    x, y = dem.xy(row, col)
    short = DivideLine(row, col, np.asarray(x), np.asarray(y), np.array([0.0, CELL]), np.array([990.0, 990.0]))
    pts = sample_divide(flow, Divide([short], divide.cells_a, divide.cells_b), spacing_m=2 * CELL,
                        channel_area_m2=2e4, reference_area_m2=2e4, chi_grid=np.zeros(dem.shape),
                        relief_radius_m=300.0)
    assert pts.size == 1
    np.testing.assert_allclose(pts.normal[0], [-1.0, 0.0], atol=1e-12)
