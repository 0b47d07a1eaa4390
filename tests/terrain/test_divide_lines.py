"""Divide lines traced between regions, against analytic surfaces with a known divide."""

from __future__ import annotations

import numpy as np
import pytest

from divides import Dem, route
from divides.assess.sides import parse_side, resolve_sides
from divides.errors import SideError
from divides.terrain.divide_lines import divide_between, divide_network

CELL = 30.0


def _true_length_in_box(point, direction, lo, hi) -> float:
    """Length of the infinite line through ``point`` along ``direction`` inside the square [lo, hi]² (cells)."""
    t = []
    for p, d in zip(point, direction):
        if abs(d) > 1e-12:
            t += [(lo - p) / d, (hi - p) / d]
    ts = np.sort(t)
    # the line is inside the box between the 2nd and 3rd crossings of the four bounding lines
    inside = [s for s in np.linspace(ts[0], ts[-1], 200001)
              if all(lo - 1e-9 <= p + s * d <= hi + 1e-9 for p, d in zip(point, direction))]
    return (max(inside) - min(inside)) if inside else 0.0


def _check_line(divide, signed_distance, true_length_m):
    # within one cell of the true line along its whole length; length within 2 %
    # (acceptance figures of the network issue; the truth is the analytic crest line)
    line = divide.lines[0]
    assert np.max(np.abs(signed_distance(line.row, line.col))) <= 1.0
    assert divide.length_m == pytest.approx(true_length_m, rel=0.02)


@pytest.mark.parametrize("angle_deg", [0.0, 12.0, 30.0, 45.0, 63.0])
@pytest.mark.parametrize("steep_ratio", [1.0, 3.0])
def test_two_planes_meeting_along_a_line(angle_deg, steep_ratio):
    # Two planes falling away from a straight crest (symmetric, or one side 3x steeper:
    # an asymmetric ridge); the crest is the divide between the cells draining each way.
    n = 160
    rr, cc = np.mgrid[0:n, 0:n].astype(float)
    a = np.radians(angle_deg)
    normal = (np.sin(a), np.cos(a))  # (row, col) components
    centre = (80.3, 79.6)
    d = (rr - centre[0]) * normal[0] + (cc - centre[1]) * normal[1]
    z = 2000.0 - np.where(d < 0, -d * steep_ratio, d) * CELL * 0.2
    dem = Dem.from_array(z, cell_size=CELL)
    flow = route(dem)
    outlets = flow.outlets
    orow, ocol = np.divmod(outlets, n)
    west_outlets = outlets[(orow - centre[0]) * normal[0] + (ocol - centre[1]) * normal[1] < 0]
    a_mask = np.isin(flow.basins(), flow.basins().ravel()[west_outlets])
    b_mask = dem.valid & ~a_mask
    divide = divide_between(dem, a_mask, b_mask)
    true_len = _true_length_in_box(centre, (-normal[1], normal[0]), 0, n - 1) * CELL

    def signed(row, col):
        return (row - centre[0]) * normal[0] + (col - centre[1]) * normal[1]

    _check_line(divide, signed, true_len)
    # orientation: side a on the left when walking the line
    line = divide.lines[0]
    walk = np.array([line.row[-1] - line.row[0], line.col[-1] - line.col[0]])
    left = np.array([-walk[1], walk[0]])  # rows grow south, cols east: left of (dr, dc) is (-dc, dr)
    assert np.dot(left, normal) < 0  # normal points from a (d < 0) to b


def test_cone_divides_run_from_apex_to_corners():
    # A cone sheds water radially, so the cells draining off the north edge and those
    # draining off the east edge meet along the diagonal from the apex to the NE corner.
    n = 161
    rr, cc = np.mgrid[0:n, 0:n].astype(float)
    z = 3000.0 - np.hypot(rr - 80, cc - 80) * CELL * 0.3
    dem = Dem.from_array(z, cell_size=CELL)
    flow = route(dem)
    sides = resolve_sides(flow, parse_side("north"), parse_side("east"))
    divide = divide_between(dem, sides.a.mask, sides.b.mask)

    def signed(row, col):  # distance (cells) from the diagonal row - 80 = -(col - 80)
        return ((row - 80) + (col - 80)) / np.sqrt(2)

    line = divide.lines[0]
    along = ((col := line.col) - 80 - (line.row - 80)) / np.sqrt(2)
    assert np.max(np.abs(signed(line.row, col))) <= 1.0
    true_len = 80 * np.sqrt(2) * CELL  # apex to corner
    assert divide.length_m == pytest.approx(true_len, rel=0.02)
    assert along.min() < 3 and along.max() > 80 * np.sqrt(2) - 3


def test_saddle_found_at_a_notch_of_known_depth():
    # A straight crest with a 25 m notch: the only dip deeper than 10 m, at the notch.
    n = 120
    rr, cc = np.mgrid[0:n, 0:n].astype(float)
    z = 1500.0 - np.abs(cc - 59.5) * CELL * 0.3
    notch = 25.0 * np.exp(-((rr - 40) ** 2) / (2 * 4.0**2))
    z = z - notch * np.exp(-((cc - 59.5) ** 2) / (2 * 6.0**2))
    dem = Dem.from_array(z, cell_size=CELL)
    flow = route(dem)
    sides = resolve_sides(flow, parse_side("west"), parse_side("east"))
    divide = divide_between(dem, sides.a.mask, sides.b.mask, saddle_depth_m=10.0)
    assert len(divide.saddles) == 1
    s = divide.saddles[0]
    _, y_notch = dem.xy(40, 59.5)
    assert abs(s["y"] - y_notch) <= 1.5 * CELL
    assert s["depth_m"] == pytest.approx(25.0, abs=3.0)  # bilinear sampling half a cell off the crest
    assert divide_between(dem, sides.a.mask, sides.b.mask, saddle_depth_m=40.0).saddles == []


def test_divide_errors():
    dem = Dem.from_array(np.zeros((10, 10)), cell_size=CELL)
    a = np.zeros((10, 10), bool)
    b = np.zeros((10, 10), bool)
    a[:, :3] = True
    b[:, 6:] = True
    with pytest.raises(SideError, match="do not touch"):
        divide_between(dem, a, b)
    with pytest.raises(SideError, match="overlap"):
        divide_between(dem, a, a)


def test_network_segments_between_three_basins():
    # Three regions meeting at a point: three segments, each between one pair, ending at the junction.
    n = 90
    rr, cc = np.mgrid[0:n, 0:n].astype(float)
    angle = np.degrees(np.arctan2(rr - 45, cc - 45)) % 360
    labels = 1 + (angle >= 120).astype(int) + (angle >= 240).astype(int)
    dem = Dem.from_array(np.zeros((n, n)), cell_size=CELL)
    segments = divide_network(dem, labels)
    pairs = sorted((s.label_a, s.label_b) for s in segments)
    assert pairs == [(1, 2), (1, 3), (2, 3)]
    for seg in segments:
        line = seg.line
        # contact cells are cells of each label touching the other (8-neighbours), by definition
        rows, cols = np.divmod(seg.cells_a, n)
        assert np.all(labels[rows, cols] == seg.label_a)
        ends = np.array([[line.row[0], line.col[0]], [line.row[-1], line.col[-1]]])
        # one end near the junction (45, 45), within 2 cells (the traced band stops short of it)
        assert np.min(np.hypot(ends[:, 0] - 45, ends[:, 1] - 45)) <= 2.5
        # ray length from the junction to the grid edge along that direction (~45 cells), within 5 %
        assert line.length_m == pytest.approx(np.max(np.hypot(ends[:, 0] - 45, ends[:, 1] - 45)) * CELL, rel=0.05)
