"""Side SPECs, their resolution to basins, and the common base level."""

from __future__ import annotations

import numpy as np
import pytest
from pyproj import Transformer

from divides import Dem, route
from divides.terrain.sides import (
    common_base_level,
    default_snap_radius_m,
    parse_side,
    resolve_side,
    resolve_sides,
)
from divides.errors import ParameterError, SideError
from divides.terrain.channels import extract_channels

CELL = 30.0


def _basins_dem(seed: int = 3, n: int = 60) -> Dem:
    """Rough terrain on a dome: many basins draining to every edge, UTM zone 33N coordinates."""
    rng = np.random.default_rng(seed)
    rr, cc = np.mgrid[0:n, 0:n]
    z = 500.0 - 0.02 * ((rr - n / 2) ** 2 + (cc - n / 2) ** 2) + rng.random((n, n)) * 8.0
    from affine import Affine

    return Dem.from_array(z, transform=Affine(CELL, 0, 500000.0, 0, -CELL, 5000000.0), crs="EPSG:32633")


def test_parse_side_accepts_edges_and_points_and_refuses_the_rest():
    assert parse_side(" NORTH ").edge == "north"  # edges are case-insensitive (common practice)
    assert parse_side("1,2;3.5,-4e2").points == ((1.0, 2.0), (3.5, -400.0))
    for bad in ("", "up", "1;2", "1,2,3", "a,b"):
        with pytest.raises(SideError):
            parse_side(bad)
    with pytest.raises(SideError, match="longitude"):
        parse_side("500000,5000000", lonlat=True)


def test_point_sides_are_exactly_unions_of_upstream_basins():
    # Reference: the set of cells whose flow path passes through a seed, found by walking
    # receivers in plain Python (independent of the order/upstream-count shortcut).
    dem = _basins_dem()
    flow = route(dem)
    rows, cols = dem.shape
    rec = flow.receivers
    big = np.argsort(-flow.area.ravel()[flow.outlets])[:3]
    seeds = flow.outlets[big]
    pts = ";".join("{:.1f},{:.1f}".format(*(float(v) for v in dem.xy(*divmod(int(s), cols)))) for s in seeds)
    side = resolve_side(flow, parse_side(pts), snap_radius_m=0.0)
    expected = np.zeros(rows * cols, bool)
    for i in np.flatnonzero(dem.valid.ravel()):
        j = i
        while True:
            if j in seeds:
                expected[i] = True
                break
            if rec[j] == j:
                break
            j = rec[j]
    np.testing.assert_array_equal(side.mask.ravel(), expected)
    # for outlets the upstream set is the whole basin: compare with the routing's basin labels
    labels = flow.basins().ravel()
    np.testing.assert_array_equal(side.mask.ravel(), np.isin(labels, labels[seeds]))
    assert side.area_m2 == pytest.approx(expected.sum() * CELL * CELL)


def test_snapping_takes_the_largest_area_cell_within_the_radius():
    # Reference: brute force over every cell centre within the radius.
    dem = _basins_dem(5)
    flow = route(dem)
    x, y = (float(v) for v in dem.xy(20, 33))
    radius = 100.0
    side = resolve_side(flow, parse_side(f"{x},{y}"), snap_radius_m=radius)
    rr, cc = np.mgrid[0:60, 0:60]
    within = np.hypot((rr - 20) * CELL, (cc - 33) * CELL) <= radius
    best = np.max(flow.area[within])
    snap = side.snapped[0]
    assert snap["area_m2"] == best
    assert snap["distance_m"] <= radius
    assert default_snap_radius_m(flow) == 5 * CELL


def test_lonlat_points_land_on_the_same_basin_as_projected_points():
    # Reference: pyproj converts the UTM point to lon/lat independently.
    dem = _basins_dem()
    flow = route(dem)
    x, y = (float(v) for v in dem.xy(30, 12))
    lon, lat = Transformer.from_crs("EPSG:32633", "EPSG:4326", always_xy=True).transform(x, y)
    projected = resolve_side(flow, parse_side(f"{x},{y}"))
    geographic = resolve_side(flow, parse_side(f"{lon},{lat}", lonlat=True))
    np.testing.assert_array_equal(projected.mask, geographic.mask)


def test_edge_sides_and_corner_cells():
    # On a dome every edge drains something; north and east share only the NE corner cell.
    dem = _basins_dem()
    flow = route(dem)
    sides = resolve_sides(flow, parse_side("north"), parse_side("east"))
    assert not np.any(sides.a.mask & sides.b.mask)
    rows, cols = dem.shape
    assert not sides.a.mask[0, cols - 1] and not sides.b.mask[0, cols - 1]
    # every outlet on the west edge (column 0) drains into the west side
    west = resolve_side(flow, parse_side("west"))
    assert west.mask[:, 0].all()


def test_side_errors():
    dem = _basins_dem()
    flow = route(dem)
    left, bottom, right, top = dem.bounds
    with pytest.raises(SideError, match="outside the DEM"):
        resolve_side(flow, parse_side(f"{left - 100},{top - 100}"))
    with pytest.raises(SideError, match="the same"):
        resolve_sides(flow, parse_side("west"), parse_side("West"))
    x, y = (float(v) for v in dem.xy(30, 30))
    with pytest.raises(SideError, match="overlap"):
        # the dome's summit region drains somewhere; a point on an edge outlet downstream of it overlaps
        cols = dem.shape[1]
        outlet = int(flow.outlets[np.argmax(flow.area.ravel()[flow.outlets])])
        head = int(flow.upstream_cells(outlet)[-1])
        xo, yo = dem.xy(*divmod(outlet, cols))
        xh, yh = dem.xy(*divmod(head, cols))
        resolve_sides(flow, parse_side(f"{xo},{yo}"), parse_side(f"{xh},{yh}"), snap_radius_m=0.0)
    with pytest.raises(SideError, match="closed edge"):
        resolve_side(route(dem, closed_edges=("west",)), parse_side("west"))
    with pytest.raises(ParameterError, match="snap radius"):
        resolve_side(flow, parse_side(f"{x},{y}"), snap_radius_m=-1.0)
    z = dem.elevation.copy()
    z[10, 10] = np.nan
    holed = Dem.from_array(z, transform=dem.transform, crs=dem.crs)
    xh, yh = holed.xy(10, 10)
    with pytest.raises(SideError, match="nodata"):
        resolve_side(route(holed), parse_side(f"{xh},{yh}"))


def _two_valleys(n: int = 61):
    """Two convergent valleys draining west (outlet 100 m) and east (outlet 161 m), meeting at a crest.

    The cross-valley slope (8 m per cell) is steeper than the down-valley one (2 and 1.5 m per
    cell), so each side drains through one trunk along row 30: one channel network per side.
    """
    rr, cc = np.mgrid[0:n, 0:n].astype(float)
    west = 100.0 + cc * 2.0 + np.abs(rr - 30) * 8.0
    east = 161.0 + (n - 1 - cc) * 1.5 + np.abs(rr - 30) * 8.0
    return np.minimum(west, east)


def test_common_base_level_is_the_highest_outlet_and_cuts_both_networks():
    # The common base level is the highest outlet of the networks reaching the divide, so every
    # one of them reaches it (Willett et al. 2014; Forte & Whipple 2018): here the east trunk's.
    z = _two_valleys()
    dem = Dem.from_array(z, cell_size=CELL)
    flow = route(dem)
    channels = extract_channels(flow, threshold_m2=20 * CELL * CELL)
    sides = resolve_sides(flow, parse_side("west"), parse_side("east"))
    base = common_base_level(channels, sides)
    on_a = sides.a.mask.ravel()[channels.cells]
    on_b = sides.b.mask.ravel()[channels.cells]
    assert base.elevation_m == pytest.approx(z[30, -1])  # the east trunk's outlet (analytic: 161 m)
    assert base.lowest_a_m == pytest.approx(z[30, 0])
    assert base.networks["a"]["used"] == 1 and base.networks["b"]["used"] == 1
    zc = channels.elevation
    np.testing.assert_array_equal(base.kept_a, on_a & (zc >= base.elevation_m))
    np.testing.assert_array_equal(base.kept_b, on_b & (zc >= base.elevation_m))
    # χ starts where a kept channel's next cell downstream is not kept (brute force)
    for kept, nodes in ((base.kept_a, base.nodes_a), (base.kept_b, base.nodes_b)):
        expected = [k for k in range(channels.size)
                    if kept[k] and (channels.down[k] < 0 or not kept[channels.down[k]])]
        assert nodes.tolist() == expected
    # the west trunk crosses 161 m between its cells at 162 and 160 m (columns 31 and 30): halfway
    # (linear interpolation)
    (k,) = [k for k in base.nodes_a if channels.cells[k] == 30 * 61 + 31]
    assert zc[k] == pytest.approx(162.0) and zc[channels.down[k]] == pytest.approx(160.0)
    assert base.start_m[k] == pytest.approx(0.5 * CELL)
    user = common_base_level(channels, sides, elevation_m=200.0)
    assert user.source == "user" and np.all(zc[user.kept_a] >= 200.0)
    with pytest.raises(SideError, match="base level"):
        common_base_level(channels, sides, elevation_m=1e5)
    tiny = extract_channels(flow, threshold_m2=1e9)
    with pytest.raises(SideError, match="no channels"):
        common_base_level(tiny, sides)


def test_a_user_base_level_below_an_outlet_leaves_that_network_out_and_counts_it():
    # A base level of 130 m: the east network's outlet (161 m) stands above it, so χ measured
    # from 130 m cannot include it (its channel never crosses 130 m): left out, counted.
    z = _two_valleys()
    flow = route(Dem.from_array(z, cell_size=CELL))
    channels = extract_channels(flow, threshold_m2=20 * CELL * CELL)
    sides = resolve_sides(flow, parse_side("west"), parse_side("east"))
    with pytest.raises(SideError, match="side b has no channel network"):
        common_base_level(channels, sides, elevation_m=130.0)
    # with a second, lower east outlet the user base keeps that one and leaves the other out
    flow2 = route(Dem.from_array(_two_valleys_with_low_east(), cell_size=CELL))
    channels2 = extract_channels(flow2, threshold_m2=20 * CELL * CELL)
    sides2 = resolve_sides(flow2, parse_side("west"), parse_side("east"))
    base2 = common_base_level(channels2, sides2, elevation_m=130.0)
    assert base2.networks["b"]["outlet_above_base"] >= 1 and base2.networks["b"]["used"] >= 1
    zc = channels2.elevation
    assert np.all(zc[base2.kept_b] >= 130.0)


def _two_valleys_with_low_east(n: int = 61):
    """Two east valleys (outlets 160 m along row 15, 100 m along row 45) and one west valley."""
    rr, cc = np.mgrid[0:n, 0:n].astype(float)
    west = 100.0 + cc * 2.0 + np.abs(rr - 30) * 8.0
    east_hi = 160.0 + (n - 1 - cc) * 1.5 + np.abs(rr - 15) * 8.0
    east_lo = 100.0 + (n - 1 - cc) * 3.0 + np.abs(rr - 45) * 8.0
    return np.minimum(west, np.minimum(east_hi, east_lo))


def test_chi_starts_at_the_interpolated_crossing():
    # One straight channel of uniform area A: χ = (A0/A)^θ × distance above the crossing of the
    # base level (definition of χ; Perron & Royden 2013). The crossing lies 0.3 of a step
    # above the node below the base node.
    from divides.profiles.chi import integrate_chi

    down = np.arange(-1, 9)
    step = np.r_[0.0, np.full(9, 10.0)]
    keep = np.arange(10) >= 3
    start = np.zeros(10)
    start[3] = 7.0  # the crossing is 7 m below node 3
    chi = integrate_chi(down, step, np.full(10, 4.0), theta=0.5, keep=keep, start_m=start)
    np.testing.assert_allclose(chi[3:], 0.5 * (7.0 + 10.0 * np.arange(7)))
    assert np.all(np.isnan(chi[:3]))
