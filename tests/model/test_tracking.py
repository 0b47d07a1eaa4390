"""Divide position between opposite edges on surfaces whose divide is known by construction."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from divides import Dem, route
from divides.errors import ParameterError
from divides.model import DivideTrack, divide_positions, edge_catchments
from divides.model.tracking import exchange_displacement, shared_length
from divides.terrain.divide_lines import divide_between


def _crest_surface(rows: int, cols: int, crest: int) -> np.ndarray:
    """A ridge highest at column ``crest``, which drains west (its east neighbour is higher
    than its west one by construction: the peak sits 0.4 cells east of the crest column)."""
    x = np.arange(cols, dtype=np.float64)
    return np.repeat((100.0 - np.abs(x - (crest + 0.4)))[None, :], rows, axis=0)


@settings(max_examples=40, deadline=None)
@given(
    rows=st.integers(3, 12),
    cols=st.integers(5, 20),
    crest_share=st.floats(0.0, 1.0),
    dx=st.sampled_from([10.0, 30.0, 90.0]),
    dy=st.sampled_from([10.0, 45.0]),
)
def test_positions_on_a_constructed_ridge(rows, cols, crest_share, dx, dy):
    # By construction (D8 steepest descent, O'Callaghan & Mark 1984): columns 0..crest drain
    # west and the rest east, so on every interior row the divide is the face after column
    # `crest`, (crest + 1) dx from the west edge. The first and last rows drain to the north
    # and south edges (outlets there), so the divide does not cross them.
    crest = 1 + int(round(crest_share * (cols - 4)))
    z = _crest_surface(rows, cols, crest)
    flow = route(Dem.from_array(z, cell_size=(dx, dy)))
    labels = edge_catchments(flow, ["west", "east"])
    assert np.all(labels[1:-1, : crest + 1] == 1) and np.all(labels[1:-1, crest + 1 :] == 2)
    west = divide_positions(flow, "west", "east")
    np.testing.assert_allclose(west[1:-1], (crest + 1) * dx, rtol=1e-12)
    assert np.isnan(west[0]) and np.isnan(west[-1])
    # measured from the east edge instead, the two positions add up to the width (symmetry)
    east = divide_positions(flow, "east", "west")
    np.testing.assert_allclose(west[1:-1] + east[1:-1], cols * dx, rtol=1e-12)
    # the same surface turned a quarter (transposed): the divide runs along columns
    flow_t = route(Dem.from_array(z.T.copy(), cell_size=(dy, dx)))
    north = divide_positions(flow_t, "north", "south")
    np.testing.assert_allclose(north[1:-1], (crest + 1) * dx, rtol=1e-12)
    south = divide_positions(flow_t, "south", "north")
    np.testing.assert_allclose(south[1:-1], (cols - crest - 1) * dx, rtol=1e-12)


def test_cells_draining_elsewhere_split_evenly_and_where_excludes_cells():
    # Definition (divides.model.tracking): cells of the line draining to neither side count
    # half to each; `where` drops cells altogether (leading ones still occupy the line).
    z = _crest_surface(7, 12, 5)
    flow = route(Dem.from_array(z, cell_size=10.0))
    where = np.ones(z.shape, dtype=bool)
    where[:, :2] = False  # two leading columns not counted: the line starts at column 2
    pos = divide_positions(flow, "west", "east", where=where)
    np.testing.assert_allclose(pos[1:-1], 60.0)  # still the face after column 5
    # with a nodata hole on the divide, its neighbours become outlets draining "elsewhere"
    z2 = z.copy()
    z2[3, 5:7] = np.nan
    flow2 = route(Dem.from_array(z2, cell_size=10.0))
    pos2 = divide_positions(flow2, "west", "east")
    # row 3: west cells 0..3 (4), the outlets at columns 4 and 7 (2, split evenly),
    # two invalid cells not counted, east cells 8..11 (4): 4 + 2/2 = 5 cells
    assert pos2[3] == pytest.approx(50.0)


def test_track_mean_and_rate():
    # A divide moving by a known constant rate: least squares recovers it exactly (common practice).
    times = np.array([0.0, 1e3, 2e3, 4e3])
    positions = np.array([[100.0, 110.0, np.nan], [102.0, 112.0, np.nan], [104.0, 114.0, 50.0], [108.0, 118.0, np.nan]])
    positions[2, 2] = np.nan
    track = DivideTrack("west", "east", times, positions, np.array([0.0, 1.0, 2.0]))
    np.testing.assert_allclose(track.mean, [105.0, 107.0, 109.0, 113.0])
    assert track.rate() == pytest.approx(2e-3, rel=1e-12)
    assert track.rate(start=1e3, end=2e3) == pytest.approx(2e-3, rel=1e-12)
    with pytest.raises(ParameterError, match="a rate needs at least two"):
        track.rate(start=3e3)
    empty = DivideTrack("west", "east", times[:1], np.full((1, 3), np.nan), np.zeros(3))
    assert np.isnan(empty.mean[0])


@pytest.mark.parametrize(
    ("sides", "message"),
    [
        (("west", "north"), "sides 'west' and 'north' are not opposite edges"),
        (("up", "east"), "side_a 'up' is not a DEM edge"),
        (("west", "down"), "side_b 'down' is not a DEM edge"),
    ],
)
def test_bad_sides_are_named(sides, message):
    flow = route(Dem.from_array(_crest_surface(5, 8, 3), cell_size=10.0))
    with pytest.raises(ParameterError, match=message):
        divide_positions(flow, *sides)


@settings(max_examples=40, deadline=None)
@given(
    rows=st.integers(6, 24),
    shift=st.integers(-6, 6),
    eaten=st.tuples(st.integers(0, 2), st.integers(0, 2)),
    which=st.sampled_from(["a", "b", "both"]),
    dx=st.sampled_from([10.0, 30.0]),
    dy=st.sampled_from([10.0, 25.0]),
)
def test_exchanged_area_over_shared_length_is_the_shift(rows, shift, eaten, which, dx, dy):
    # By construction (geometry of a straight divide): side a holds the first 15 columns, then
    # the divide moves `shift` columns east (negative: west) on every row that still separates the
    # two sides. The first and last `eaten` rows are taken by a third basin (an open edge) from
    # side a, side b or both; there the divide does not move. The mean displacement over the
    # stretch present at both times is shift x dx exactly, whatever the ends did.
    cols = 40
    dem = Dem.from_array(np.zeros((rows, cols)), cell_size=(dx, dy))
    a0 = np.zeros((rows, cols), dtype=bool)
    a0[:, :15] = True
    b0 = ~a0
    a1 = np.zeros_like(a0)
    a1[:, : 15 + shift] = True
    b1 = ~a1
    ends = np.zeros(rows, dtype=bool)
    ends[: eaten[0]] = True
    ends[rows - eaten[1]:] = True
    a1[ends], b1[ends] = a0[ends], b0[ends]  # pinned ends ...
    if which in ("a", "both"):
        a1[ends] = False  # ... whose cells of side a now drain elsewhere
    if which in ("b", "both"):
        b1[ends] = False
    lines = divide_between(dem, a0, b0).lines
    area = np.full((rows, cols), dx * dy)
    moved = exchange_displacement(area, (a0, b0), (a1, b1), lines)
    assert moved == pytest.approx(shift * dx, rel=1e-9, abs=1e-9)
    # the stretch kept is the rows not eaten (one cell of divide per row)
    assert shared_length(lines, (a0 | b0) & (a1 | b1)) == pytest.approx((rows - ends.sum()) * dy, rel=1e-9)


def test_oblique_divide_moves_by_its_normal_distance():
    # Geometry: a divide at 45 degrees on square cells, moved k cells east, is displaced
    # k dx / sqrt(2) along its normal. The traced (smoothed) line keeps its length within a few
    # per cent of the true diagonal; 5 % slack.
    n, k, dx = 40, 4, 10.0
    dem = Dem.from_array(np.zeros((n, n + 20)), cell_size=dx)
    r, c = np.mgrid[0:n, 0 : n + 20]
    a0, a1 = c < r + 5, c < r + 5 + k
    lines = divide_between(dem, a0, ~a0).lines
    d = exchange_displacement(np.full(a0.shape, dx * dx), (a0, ~a0), (a1, ~a1), lines)
    assert d == pytest.approx(k * dx / np.sqrt(2.0), rel=0.05)


def test_the_model_room_does_not_import_the_assessment():
    # Project rule (DESIGN, rooms): the model uses terrain only; what joins it with the
    # assessment (the forecast) sits above both.
    code = ("import sys, divides.model, divides.model.scenarios, divides.model.tracking; "
            "print(sorted(m for m in sys.modules if m.startswith(('divides.assess', 'divides.profiles'))))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
