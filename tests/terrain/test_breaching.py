"""Tests of depression breaching (divides.terrain.breaching).

References outside the project: hand-derived analytic cases, scikit-image's
morphological reconstruction as the reference depression filler, networkx as the
reference for least-cost paths and for "every cell drains to an outlet", and
scipy.ndimage for an independent count of depressions.
"""

from __future__ import annotations

import math

import networkx as nx
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy import ndimage
from skimage.morphology import reconstruction

from divides.errors import ParameterError
from divides.terrain.breaching import (
    DEFAULT_MAX_DEPTH_M,
    DEFAULT_MAX_LENGTH_CELLS,
    BreachResult,
    breach_depressions,
)

INF = math.inf
_SETTINGS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


# ----------------------------------------------------------------------------- helpers
def _edges(shape: tuple[int, int]) -> np.ndarray:
    e = np.zeros(shape, dtype=bool)
    e[[0, -1], :] = True
    e[:, [0, -1]] = True
    return e


def _outlets(valid: np.ndarray) -> np.ndarray:
    """Grid edge and cells next to nodata, as the project defines outlets."""
    near_void = ndimage.binary_dilation(~valid, structure=np.ones((3, 3), bool))
    return valid & (_edges(valid.shape) | near_void)


def _run(z, valid=None, outlets=None, *, d=1.0, **kw) -> BreachResult:
    rows = z.shape[0]
    valid = np.isfinite(z) if valid is None else valid
    outlets = _outlets(valid) if outlets is None else outlets
    return breach_depressions(z, valid, outlets, dx=np.full(rows, d), dy=np.full(rows, d), **kw)


def _fill_reference(z, valid, outlets) -> np.ndarray:
    """Depression filling by grayscale reconstruction by erosion (scikit-image).

    Seed = elevation on outlets (and on nodata, treated as the lowest ground),
    the maximum elsewhere: the result is the lowest surface >= z in which every
    cell has a non-ascending 8-connected path to an outlet (Soille 2004,
    Morphological Image Analysis, ch. 6 [from memory]).
    """
    zz = np.where(valid, z.astype(np.float64), np.nanmin(np.where(valid, z, np.nan)) - 1.0)
    seed = np.where(outlets | ~valid, zz, zz.max())
    return reconstruction(seed, zz, method="erosion")


def _all_drain(z, valid, outlets) -> bool:
    """networkx: does every valid cell reach an outlet along non-ascending D8 steps?"""
    g = nx.DiGraph()
    rows, cols = z.shape
    for r in range(rows):
        for c in range(cols):
            if not valid[r, c]:
                continue
            g.add_node((r, c))
            if outlets[r, c]:
                g.add_edge((r, c), "sink")
            for dr in (-1, 0, 1):
                for dc in (-1, 0, 1):
                    rr, cc = r + dr, c + dc
                    if (dr or dc) and 0 <= rr < rows and 0 <= cc < cols and valid[rr, cc] and z[rr, cc] <= z[r, c]:
                        g.add_edge((r, c), (rr, cc))
    if "sink" not in g:
        return False
    reach = nx.ancestors(g, "sink")
    return all((r, c) in reach for r, c in zip(*np.nonzero(valid)))


def _depressions(z, valid, outlets) -> tuple[int, np.ndarray]:
    """scipy.ndimage: number of depression bottoms and a mask of their cells.

    A bottom is an 8-connected set of equal-elevation cells, none an outlet and
    none with a strictly lower neighbour (common practice: a pit or a closed flat).
    """
    zz = np.where(valid, z, np.inf)
    fp = np.ones((3, 3), bool)
    fp[1, 1] = False
    nb_min = ndimage.minimum_filter(zz, footprint=fp, mode="constant", cval=np.inf)
    has_lower = valid & (nb_min < zz)
    count = 0
    bottoms = np.zeros(z.shape, bool)
    for v in np.unique(z[valid]):
        lab, n = ndimage.label(valid & (z == v), structure=np.ones((3, 3)))
        for k in range(1, n + 1):
            m = lab == k
            if not (has_lower[m].any() or outlets[m].any()):
                count += 1
                bottoms |= m
    return count, bottoms


@st.composite
def _random_dems(draw, with_voids: bool = True):
    """Small integer-valued DEMs (many pits and flats), optionally with nodata holes."""
    rows = draw(st.integers(4, 10))
    cols = draw(st.integers(4, 10))
    levels = draw(st.integers(2, 12))
    z = draw(arrays(np.int16, (rows, cols), elements=st.integers(0, levels - 1)))
    dtype = draw(st.sampled_from([np.float32, np.float64]))
    z = z.astype(dtype) * dtype(draw(st.sampled_from([1.0, 0.5, 7.25])))
    if with_voids and draw(st.booleans()):
        holes = draw(arrays(np.bool_, (rows, cols), elements=st.sampled_from([False] * 6 + [True])))
        z[holes] = np.nan
    return z


# ----------------------------------------------------------------------------- analytic cases
def test_single_pit_in_tilted_plane_is_carved_downslope():
    # Analytic (derived by hand): a plane rising 1 m per column eastward, with a
    # valley (0.5 m per row) along row 7. A pit 5 m below the plane at column 8
    # is cheapest to drain straight west: columns 7..4 must drop 4, 3, 2, 1 m,
    # column 3 (level with the pit) a few representable steps, column 2 is lower.
    rows, cols = 15, 12
    r, c = np.mgrid[:rows, :cols]
    z = 10.0 + c + 0.5 * np.abs(r - 7)
    z[7, 8] -= 5.0
    res = _run(z, max_length_m=INF, max_depth_m=INF)
    assert (res.n_pits, res.n_breached, res.n_unresolved) == (1, 1, 0)
    changed = np.argwhere(res.surface != z)
    assert sorted(map(tuple, changed)) == [(7, k) for k in range(3, 8)]
    assert res.carved_cells == 5
    assert res.carved_volume_m3 == pytest.approx(4 + 3 + 2 + 1, abs=1e-9)
    path = res.surface[7, 2:9][::-1]  # from the pit west to the exit
    assert np.all(np.diff(path) < 0)  # strictly descending (Lindsay 2016: monotone breach path)
    assert path[0] == z[7, 8] and path[-1] == z[7, 2]  # pit and exit themselves untouched


def test_dam_is_cut_through_instead_of_filling_the_valley():
    # Analytic: a V-shaped valley falling 1 m per row to the south, blocked by a
    # one-cell-wide embankment 8 m high. The cheapest breach lowers the crest cell
    # only (by 8 - 1 = 7 m), while filling would pond the valley upstream
    # (scikit-image reconstruction as the reference filler).
    rows, cols = 20, 11
    r, c = np.mgrid[:rows, :cols]
    z = 200.0 - r + 2.0 * np.abs(c - 5)
    z[14, 1:10] += 8.0
    valid = np.ones(z.shape, bool)
    outlets = _edges(z.shape)
    res = breach_depressions(z, valid, outlets, dx=np.full(rows, 10.0), dy=np.full(rows, 10.0))
    assert (res.n_pits, res.n_breached) == (1, 1)
    assert res.carved_cells == 1
    assert np.argwhere(res.surface != z).tolist() == [[14, 5]]
    assert z[15, 5] < res.surface[14, 5] < z[13, 5]
    assert res.carved_volume_m3 == pytest.approx(7.0 * 100.0, rel=1e-9)
    filled = _fill_reference(z, valid, outlets)
    assert np.count_nonzero(filled > z) >= 5  # filling would raise the pond behind the dam
    assert np.array_equal(_fill_reference(res.surface, valid, outlets), res.surface)  # nothing left to fill


def test_equally_cheap_breaches_take_the_shortest_path():
    # Analytic: on a plane tilted only east-west, a diagonal step west meets the
    # same elevations as a straight one, so many paths need the same lowering;
    # the straight one along the pit's row is the shortest (a stated design
    # choice: ties in lowering go to the shorter path).
    rows, cols = 15, 12
    c = np.mgrid[:rows, :cols][1]
    z = 10.0 + c
    z[7, 8] -= 5.0
    res = _run(z, max_length_m=INF, max_depth_m=INF)
    assert sorted(map(tuple, np.argwhere(res.surface != z))) == [(7, k) for k in range(3, 8)]


def test_exit_only_one_step_below_the_pit_is_not_taken_flat():
    # Definition (strictly descending breach path): the cell two steps from the
    # pit lies exactly one representable step below the pit, i.e. level with
    # the bed the first carved cell gets, so it cannot be the exit; it must be
    # lowered too and the path continues to the 90 m cell. float32 and float64.
    for dtype in (np.float32, np.float64):
        z = np.full((9, 9), 100.0, dtype=dtype)
        z[4, 4] = 95.0
        z[4, 5] = 96.0
        z[4, 6] = np.nextafter(dtype(95.0), dtype(-np.inf))
        z[4, 7] = 90.0
        z[4, 8] = 80.0  # an outlet on the edge
        res = _run(z, max_length_m=INF, max_depth_m=INF)
        assert res.n_breached == res.n_pits == 1
        row = res.surface[4, 4:9]
        assert np.all(np.diff(row) < 0), row
        assert row[3] == dtype(90.0)


def test_pit_deeper_than_max_depth_is_left_unresolved():
    # Analytic: a 5 m deep single-cell pit in a level plateau whose edges are
    # outlets. Any breach lowers its first cell by 5 m (plus representable steps).
    z = np.full((9, 9), 100.0)
    z[4, 4] = 95.0
    shallow = _run(z, max_depth_m=4.9, max_length_m=INF)
    assert (shallow.n_pits, shallow.n_breached, shallow.n_unresolved) == (1, 0, 1)
    assert np.array_equal(shallow.surface, z)
    deep = _run(z, max_depth_m=5.5, max_length_m=INF)
    assert (deep.n_breached, deep.n_unresolved) == (1, 0)
    # Shortest route from the centre of a 9 x 9 grid to its edge: 4 cells entered,
    # the last an outlet, each lowered by ~5 m (analytic).
    assert deep.carved_cells == 4
    assert deep.carved_volume_m3 == pytest.approx(4 * 5.0, abs=1e-9)
    assert (z - deep.surface).max() <= 5.0 + 1e-9


def test_max_length_zero_changes_nothing():
    # Definition: a breach path has positive length, so a zero limit breaches nothing.
    rng = np.random.default_rng(3)
    z = rng.integers(0, 6, (12, 12)).astype(np.float64)
    res = _run(z, max_length_m=0.0, max_depth_m=INF)
    assert res.n_pits > 0
    assert (res.n_breached, res.n_unresolved) == (0, res.n_pits)
    assert np.array_equal(res.surface, z)
    assert (res.carved_cells, res.carved_volume_m3) == (0, 0.0)


def _trench(rows, cols, *, axis):
    """A 100 m trench in 200 m walls, a 99 m pit at its closed end (row or column 2)."""
    z = np.full((rows, cols), 200.0)
    if axis == "row":
        z[3, 2:] = 100.0
        z[3, 2] = 99.0
    else:
        z[2:, 3] = 100.0
        z[2, 3] = 99.0
    return z


def test_length_limit_uses_each_rows_cell_width():
    # Geometry: along a row, centre-to-centre steps are that row's dx. The only
    # breach runs from column 2 to the east edge: (cols - 3) steps of dx[3].
    rows, cols = 7, 15
    z = _trench(rows, cols, axis="row")
    dx = np.linspace(30.0, 5.0, rows)  # widths shrinking row by row, as poleward on a lon/lat grid
    dy = np.full(rows, 30.0)
    length = (cols - 3) * dx[3]
    args = (z, np.ones(z.shape, bool), _edges(z.shape))
    ok = breach_depressions(*args, dx=dx, dy=dy, max_length_m=length * (1 + 1e-9), max_depth_m=50.0)
    short = breach_depressions(*args, dx=dx, dy=dy, max_length_m=length * (1 - 1e-6), max_depth_m=50.0)
    assert (ok.n_breached, short.n_unresolved) == (1, 1)
    assert np.array_equal(short.surface, z)
    # Carved volume = sum of lowering x cell area of the row (definition).
    area = np.linspace(100.0, 900.0, rows)
    vol = breach_depressions(*args, dx=dx, dy=dy, max_length_m=INF, max_depth_m=50.0, cell_area=area)
    assert vol.carved_volume_m3 == pytest.approx(float(np.sum((z - vol.surface) * area[:, None])), rel=1e-12)


def test_length_limit_uses_half_heights_across_rows():
    # Geometry: the distance between centres of rows r and r+1 is
    # (dy[r] + dy[r+1]) / 2. The breach runs south from row 2 to the last row.
    rows, cols = 12, 7
    z = _trench(rows, cols, axis="col")
    dy = np.linspace(20.0, 40.0, rows)
    dx = np.full(rows, 25.0)
    length = float(np.sum(0.5 * (dy[2:-1] + dy[3:])))
    args = (z, np.ones(z.shape, bool), _edges(z.shape))
    ok = breach_depressions(*args, dx=dx, dy=dy, max_length_m=length * (1 + 1e-9), max_depth_m=50.0)
    short = breach_depressions(*args, dx=dx, dy=dy, max_length_m=length * (1 - 1e-6), max_depth_m=50.0)
    assert (ok.n_breached, short.n_unresolved) == (1, 1)


def test_length_limit_on_a_diagonal_uses_true_diagonal_length():
    # Geometry: a diagonal step is sqrt(dx^2 + dy^2) long. Diagonal trench from
    # (2, 2) to the south-east corner: 6 steps on a 9 x 9 grid.
    n = 9
    z = np.full((n, n), 200.0)
    for k in range(2, n):
        z[k, k] = 100.0
    z[2, 2] = 99.0
    dx, dy = 12.0, 35.0
    length = (n - 1 - 2) * math.hypot(dx, dy)
    args = (z, np.ones(z.shape, bool), _edges(z.shape))
    kw = dict(dx=np.full(n, dx), dy=np.full(n, dy), max_depth_m=50.0)
    assert breach_depressions(*args, max_length_m=length * (1 + 1e-9), **kw).n_breached == 1
    assert breach_depressions(*args, max_length_m=length * (1 - 1e-6), **kw).n_unresolved == 1


# ----------------------------------------------------------------------------- random DEMs
@_SETTINGS
@given(seed=st.integers(0, 2**32 - 1), depth=st.integers(1, 6))
def test_single_pit_cost_matches_networkx_least_cost_path(seed, depth):
    # networkx Dijkstra as the reference: on a pit-free (filled) random surface,
    # dig one pit; its breach volume (unit cells) must equal the least total
    # lowering max(0, z - z_pit) over paths to a cell below the pit or an outlet.
    rng = np.random.default_rng(seed)
    rows, cols = rng.integers(5, 11, size=2)
    z = rng.integers(0, 10, (rows, cols)).astype(np.float64)
    valid = np.ones(z.shape, bool)
    outlets = _edges(z.shape)
    z = _fill_reference(z, valid, outlets)
    pr, pc = rng.integers(1, rows - 1), rng.integers(1, cols - 1)
    z[pr, pc] = z[pr - 1 : pr + 2, pc - 1 : pc + 2].min() - depth
    zp = z[pr, pc]

    g = nx.DiGraph()
    for r in range(rows):
        for c in range(cols):
            if (r, c) != (pr, pc) and (outlets[r, c] or z[r, c] < zp):
                g.add_edge((r, c), "exit", weight=0.0)
                continue
            for dr in (-1, 0, 1):
                for dc in (-1, 0, 1):
                    rr, cc = r + dr, c + dc
                    if (dr or dc) and 0 <= rr < rows and 0 <= cc < cols:
                        g.add_edge((r, c), (rr, cc), weight=max(0.0, z[rr, cc] - zp))
    expected = nx.dijkstra_path_length(g, (pr, pc), "exit")

    res = breach_depressions(
        z, valid, outlets, dx=np.ones(rows), dy=np.ones(rows), max_length_m=INF, max_depth_m=INF
    )
    assert (res.n_pits, res.n_breached) == (1, 1)
    assert res.carved_volume_m3 == pytest.approx(expected, abs=1e-6)


@_SETTINGS
@given(z=_random_dems())
def test_unlimited_breaching_drains_every_cell(z):
    valid = np.isfinite(z)
    outlets = _outlets(valid)
    z_in = z.copy()
    res = _run(z, valid, outlets, max_length_m=INF, max_depth_m=INF)
    assert np.array_equal(z, z_in, equal_nan=True)  # input untouched
    assert res.surface.dtype == z.dtype
    s = res.surface
    assert np.all(s[valid] <= z[valid])  # never raised (Lindsay 2016: breaching only lowers)
    assert np.array_equal(s[~valid], z[~valid], equal_nan=True)
    n_dep, _ = _depressions(z, valid, outlets)
    assert res.n_pits == n_dep  # scipy.ndimage count
    assert (res.n_breached, res.n_unresolved) == (n_dep, 0)
    assert res.carved_cells == np.count_nonzero(s[valid] < z[valid])
    # Nothing left for the reference filler, and every cell drains (networkx).
    if valid.any():
        filled = _fill_reference(s, valid, outlets)
        assert np.array_equal(filled[valid], s[valid].astype(np.float64))
        assert _all_drain(s, valid, outlets)


@_SETTINGS
@given(z=_random_dems(), max_len=st.sampled_from([0.5, 1.0, 1.5, 2.5, 4.0]), max_depth=st.sampled_from([0.0, 1.0, 3.0]))
def test_limits_are_respected(z, max_len, max_depth):
    valid = np.isfinite(z)
    outlets = _outlets(valid)
    res = _run(z, valid, outlets, max_length_m=max_len, max_depth_m=max_depth)
    s = res.surface
    assert np.all(s[valid] <= z[valid])
    n_dep, bottoms = _depressions(z, valid, outlets)
    assert res.n_pits == n_dep and res.n_breached + res.n_unresolved == n_dep
    lowered = valid & (s < z)
    # Depth: no cell lowered by more than the limit (a few representable steps aside).
    assert np.all((z - s)[lowered] <= max_depth + 1e-4)
    # Length: a path is at least as long as the straight line, so every carved
    # cell lies within max_len of some depression bottom (triangle inequality).
    if lowered.any():
        dist = ndimage.distance_transform_edt(~bottoms)
        assert np.all(dist[lowered] <= max_len + 1e-9)
    # Breaching creates no depression; those left are the unresolved ones or fewer
    # (an unresolved flat may drain into a channel carved later at its level).
    n_left, _ = _depressions(s, valid, outlets)
    assert n_left <= res.n_unresolved
    # After breaching plus reference filling every cell drains (networkx).
    if valid.any():
        assert _all_drain(_fill_reference(s, valid, outlets), valid, outlets)


# ----------------------------------------------------------------------------- interface
def test_defaults_are_reported_and_float32_kept():
    z = np.full((6, 6), 10.0, dtype=np.float32)
    z[2, 3] = 9.0
    res = breach_depressions(z, np.ones(z.shape, bool), _edges(z.shape), dx=np.full(6, 20.0), dy=np.full(6, 30.0))
    assert res.surface.dtype == np.float32 and res.surface is not z
    assert res.max_length_m == pytest.approx(DEFAULT_MAX_LENGTH_CELLS * 25.0)  # 50 cells of the mean size
    assert res.max_depth_m == DEFAULT_MAX_DEPTH_M
    assert (res.n_pits, res.n_breached) == (1, 1)
    assert z[2, 3] == 9.0 and z[0, 3] == 10.0  # input untouched


@pytest.mark.parametrize(
    "kw, match",
    [
        (dict(max_length_m=-1.0), "max_length_m"),
        (dict(max_length_m=float("nan")), "max_length_m"),
        (dict(max_depth_m=-0.1), "max_depth_m"),
        (dict(max_depth_m=float("nan")), "max_depth_m"),
        (dict(max_depth_m="deep"), "max_depth_m"),
        (dict(dx=np.full(4, 1.0)), "dx"),
        (dict(dy=np.full(5, -1.0)), "dy"),
        (dict(dx=np.full(5, np.nan)), "dx"),
        (dict(cell_area=np.ones(3)), "cell_area"),
        (dict(valid=np.ones((5, 4), bool)), "valid"),
        (dict(outlets=np.ones((5, 5), np.uint8)), "outlets"),
        (dict(z=np.ones(5)), "2-D"),
        (dict(z=np.full((5, 5), np.inf)), "non-finite"),
    ],
)
def test_bad_inputs_raise_parameter_error(kw, match):
    args = dict(z=np.ones((5, 5)), valid=np.ones((5, 5), bool), outlets=_edges((5, 5)), dx=np.ones(5), dy=np.ones(5))
    args.update(kw)
    z, valid, outlets = args.pop("z"), args.pop("valid"), args.pop("outlets")
    with pytest.raises(ParameterError, match=match):
        breach_depressions(z, valid, outlets, **args)
